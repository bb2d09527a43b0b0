"""The bundled comparison specs (cases/*_checks.toml) against freshly computed coarse-grid results.

The runs are the shared ones of the other verification tests (flat plate coarse to 1e-8, step
coarse), written to a temporary result folder and compared exactly as ``fvrans compare`` does.
The references and the reasons for each tolerance are stated in the spec files; what the coarse
grids give is noted there and checked here item by item (every item must pass, none may be
missing or broken).
"""

from __future__ import annotations

import io
import json
from pathlib import Path

import pytest
from flat_plate_runs import turbulent
from step_runs import coarse

from fvrans.verify import compare_command, load_spec

ROOT = Path(__file__).resolve().parents[2]
CASES = ROOT / "cases"


def _run_spec(result, spec_name: str, tmp_path: Path) -> dict:
    out = result.write(tmp_path / "run")
    report = tmp_path / "report"
    log = io.StringIO()
    code = compare_command(out, CASES / spec_name, report, stream=log)
    rep = json.loads((report / "report.json").read_text())
    assert code == 0, log.getvalue()
    names = [it.name for it in load_spec(CASES / spec_name).items]
    assert [it["name"] for it in rep["items"]] == names and rep["n_passed"] == len(names)
    return {it["name"]: it for it in rep["items"]}


def test_reference_files_are_made_by_their_script(tmp_path):
    """The committed reference curves are exactly what make_reference.py writes (not hand-edited)."""
    import runpy

    script = runpy.run_path(str(CASES / "reference" / "make_reference.py"))
    assert script["main"](["--out", str(tmp_path)]) == 0
    made = sorted(p.name for p in tmp_path.glob("*.csv"))
    assert made == ["flat_plate_cf_correlation.csv", "law_of_the_wall_log.csv", "law_of_the_wall_sublayer.csv"]
    for name in made:
        assert (tmp_path / name).read_text() == (CASES / "reference" / name).read_text(), name


@pytest.mark.slow
def test_flat_plate_checks_on_the_coarse_grid(tmp_path):
    items = _run_spec(turbulent("coarse").result, "flat_plate_checks.toml", tmp_path)
    # the profile items compare cell centres from y+ = 0.40 (first centre) up; coverage as stated
    assert items["law_of_the_wall_sublayer"]["n_points"] >= 20
    assert items["law_of_the_wall_log"]["coverage"] == pytest.approx(1.0)
    assert items["cf_correlation"]["coverage"] >= 0.95


@pytest.mark.slow
def test_step_checks_on_the_coarse_grid(tmp_path):
    _run_spec(coarse(), "step_checks.toml", tmp_path)
