"""A result its method calls converged but whose energy fails is marked as such in every output, so a
stop on the method's own criterion (a small gradient at a stationary point) never reads as success.

The plugin iterates, then returns the Hartree-Fock determinant's energy for H2/STO-3G and says it
converged; hf-bitstring returns the same energy with no iterations (no criterion of its own: not
marked).  The error against PySCF's FCI is minus the correlation energy, about +20.6 mHa at this
geometry (the STO-3G correlation energy of H2 near 1.4 bohr, -0.0206 Eh: from memory)."""

from __future__ import annotations

import json
import xml.etree.ElementTree as ET

PLUGIN = "tests.methods.plugins:ReportsProgress"


def test_converged_but_failing_in_terminal_json_junit_and_html(run_cli, tmp_path):
    out_json, out_xml, out_html = tmp_path / "r.json", tmp_path / "r.xml", tmp_path / "r.html"
    code, out, err = run_cli("run", "--case", "h2", "--method", PLUGIN, "--method", "exact-sector", "--method", "hf-bitstring",
                             "--option", f"{PLUGIN}.seconds=0.3", "--db", str(tmp_path / "r.sqlite"),
                             "--json", str(out_json), "--junit", str(out_xml), "--report", str(out_html))
    assert code == 1, err
    assert "converged but not passing (1;" in out
    doc = json.loads(out_json.read_text())
    flags = {r["method"]: r["converged_but_failing"] for r in doc["results"]}
    assert flags == {PLUGIN: True, "exact-sector": False, "hf-bitstring": False}
    (listed,) = doc["gate"]["converged_failing"]
    assert listed["method"] == PLUGIN and 19.5 < listed["error_mha"] < 21.5
    marked = [f.get("message") for f in ET.parse(out_xml).iter("failure") if "converged but failing" in f.get("message")]
    assert len(marked) == 1 and marked[0].startswith(f"fail: E({PLUGIN})")
    assert out_html.read_text().count("converged but failing</span>") == 1
