"""benchsuite's built-in registry: case files (``cases/*.toml``), suites (``suites/*.toml``) and the
bibliography (``sources.bib``).  Installed as the package ``benchsuite.reference_data``; see
``benchsuite.registry.registry.builtin_data_dir``."""
