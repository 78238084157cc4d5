"""Reports from stored runs: gate outputs (JSON, JUnit), progress, the HTML report, citable tables."""
