"""The bundled cases travel with the package (issue #12 item 13): every file a bundled case or
spec refers to is shipped by setup.py's patterns; `fvrans cases` works from any folder; and
`fvrans copy-case` copies a case with its mesh and every file it refers to into a folder, where
it loads and refers only to its own copies.

(The installed package itself was checked by hand: a wheel built with `pip wheel .`, installed in
a fresh venv, runs `fvrans cases` and `fvrans copy-case` in an empty folder; see README.)"""

from __future__ import annotations

import ast
import fnmatch
from pathlib import Path

import pytest

from fvrans.bundled import bundled_cases_dir, bundled_root, copy_case
from fvrans.case import load_case
from fvrans.case.load import read_toml
from fvrans.cli import main
from fvrans.errors import CaseError
from fvrans.sweep import load_sweep
from fvrans.verify import load_spec

ROOT = Path(__file__).resolve().parents[1]
BUNDLED = sorted(p.relative_to(ROOT / "cases").as_posix() for p in (ROOT / "cases").rglob("*.toml"))


def _shipped_patterns() -> dict[str, tuple[str, ...]]:
    tree = ast.parse((ROOT / "setup.py").read_text())
    for node in tree.body:
        if isinstance(node, ast.AnnAssign | ast.Assign):
            target = node.target if isinstance(node, ast.AnnAssign) else node.targets[0]
            if getattr(target, "id", "") == "BUNDLED":
                return ast.literal_eval(node.value)
    raise AssertionError("setup.py has no BUNDLED")


def _load(path: Path):
    data = read_toml(path)
    if "item" in data:
        return load_spec(path)
    if "parameter" in data:
        return load_sweep(path)
    return load_case(path)


@pytest.mark.parametrize("name", BUNDLED)
def test_copy_case_copies_every_file_it_refers_to(name, tmp_path):
    written = copy_case(name, tmp_path / "mine")
    dest = (tmp_path / "mine").resolve()
    assert written[0] == tmp_path / "mine" / Path(name).name
    assert all(dest in p.resolve().parents for p in written)
    loaded = _load(written[0])  # validates, mesh and profile paths included
    if hasattr(loaded, "mesh") and loaded.mesh.file is not None:
        assert dest in loaded.mesh.file.parents  # its own copy, not the bundled one
    patterns = _shipped_patterns()
    for p in written:  # everything it needs is shipped by the package
        rel = (bundled_root() / p.resolve().relative_to(dest))
        folder = "cases" if p.suffix in (".toml", ".csv") and p.parent.name != "meshes" else "meshes"
        assert any(fnmatch.fnmatch(p.name, pat) for pat in patterns[folder]), rel
    with pytest.raises(CaseError, match="already exist"):
        copy_case(name, tmp_path / "mine")


def test_cases_and_copy_case_from_an_empty_folder(tmp_path, monkeypatch, capsys):
    monkeypatch.chdir(tmp_path)
    assert main(["cases"]) == 0
    out = capsys.readouterr().out
    assert "cavity_re100.toml" in out and "sweeps/channel_speed_viscosity.toml" in out
    assert main(["copy-case", "cavity_re100", "start"]) == 0
    assert (tmp_path / "start" / "cavity_re100.toml").is_file()
    assert (tmp_path / "start" / "meshes" / "cavity_128.msh").is_file()
    assert "fvrans run start/cavity_re100.toml" in capsys.readouterr().err
    assert main(["copy-case", "cavity", "x"]) == 2
    assert "no bundled case 'cavity'" in capsys.readouterr().err
    assert bundled_cases_dir().is_dir()
