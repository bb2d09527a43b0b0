"""Refusals instead of tracebacks and hangs (issue 13, items 5 and 6): each value the fault campaign
found becomes exit status 2 naming the key, before any solving; files that are not regular (named
pipes, devices) and oversized profiles are refused at once."""

from __future__ import annotations

import contextlib
import os
import signal
from pathlib import Path

import numpy as np
import pytest
from hostile_cases import write_cavity

import fvrans.api as fa
from fvrans.case import case_from_dict, load_case
from fvrans.cli import main
from fvrans.errors import CaseError


@pytest.fixture
def case_file(tmp_path):
    return write_cavity(tmp_path / "case.toml")


@contextlib.contextmanager
def deadline(seconds: int = 20):
    """A refusal must come at once: a blocked read fails the test instead of hanging the suite."""
    def hang(*_):
        raise TimeoutError("blocked: the file was opened instead of refused")

    old = signal.signal(signal.SIGALRM, hang)
    signal.alarm(seconds)
    try:
        yield
    finally:
        signal.alarm(0)
        signal.signal(signal.SIGALRM, old)


# the values of issue 13 item 5 (and neighbours), each with the key the message must name
BAD_VALUES = [
    ("output.reference_velocity=1e-200", "output.reference_velocity"),
    ("output.reference_velocity=1e200", "output.reference_velocity"),
    ("output.reference_velocity=5e-324", "output.reference_velocity"),
    ("output.reference_length=1e-200", "output.reference_length"),
    ("output.reference_length=1e200", "output.reference_length"),
    ("output.reference_length=5e-324", "output.reference_length"),
    ("fluid.density=5e-324", "fluid.density"),
    ("fluid.viscosity=1e300", "fluid.viscosity"),
    ("probes.a={start=[1e300, 0.5], end=[0.5, 0.5]}", "probes.a.start"),
    ("probes.a={start=[0.1, 0.5], end=[0.5, 0.5], points=1e9}", "<= 100000"),
    ("probes.a={start=[0.1, 0.5], end=[0.5, 0.5], points=1e30}", "probes.a.points"),
    ("mesh.parameters={n=nan}", "mesh.parameters.n"),
    ("mesh.parameters={n=inf}", "mesh.parameters.n"),
    ("mesh.parameters={n=4611686018427387904}", "mesh.parameters.n"),
    ("mesh.parameters={n=100000}", "GiB"),  # 1e10 cells: refused with the memory estimate
    ("mesh.parameters={n=[8]}", "mesh.parameters.n"),
    ("mesh.parameters={n={a=1}}", "mesh.parameters.n"),
    ("mesh.parameters={n=true}", "mesh.parameters.n"),
    ("mesh.parameters={n=\"8\"}", "mesh.parameters.n"),
    ("mesh.parameters={n=8.5}", "mesh.parameters.n"),
    ("mesh.parameters={n=8, triangles=1}", "mesh.parameters.triangles"),
    ("mesh.parameters={n=8, triangles=\"yes\"}", "mesh.parameters.triangles"),
    ("mesh.parameters={n=8, size=nan}", "mesh.parameters.size"),
    ("solver.max_iterations=4611686018427387904", "solver.max_iterations"),
    ("solver.max_iterations=1e300", "solver.max_iterations"),
    ("initial.velocity=[1e308, 0.0]", "initial.velocity"),
    ("boundary.lid.velocity=[1e31, 0.0]", "boundary.lid.velocity"),
]


@pytest.mark.parametrize("override, key", BAD_VALUES, ids=[b[0][:40] for b in BAD_VALUES])
def test_bad_values_exit_2_naming_the_key_before_solving(case_file, tmp_path, capsys, monkeypatch, override, key):
    def no_solve(*a, **k):
        raise AssertionError("the solver was started")

    monkeypatch.setattr(fa, "solve", no_solve)
    assert main(["run", str(case_file), "--out", str(tmp_path / "out"), "--quiet", "--set", override]) == 2
    err = capsys.readouterr().err
    assert key in err and "Traceback" not in err


def test_generated_meshes_that_cannot_fit_are_refused_with_the_estimate(case_file):
    case = load_case(case_file).set("mesh.parameters", {"n": 200_000})
    with pytest.raises(CaseError, match=r"about 4e\+10 cells.*GiB"):
        fa.prepare(case)


@pytest.mark.parametrize("what", ["300 characters", "NUL", "symlink loop", "fifo", "device", "directory"])
def test_bad_mesh_paths_are_refused(tmp_path, case_file, what):
    base = load_case(case_file).to_dict()
    base["mesh"] = {"file": "x.msh"}
    path = {"300 characters": "a" * 300 + ".msh", "NUL": "a\x00b.msh", "symlink loop": "loop1",
            "fifo": "pipe.msh", "device": "/dev/zero", "directory": str(tmp_path)}[what]
    (tmp_path / "loop1").symlink_to(tmp_path / "loop2")
    (tmp_path / "loop2").symlink_to(tmp_path / "loop1")
    os.mkfifo(tmp_path / "pipe.msh")
    base["mesh"]["file"] = path
    with deadline(), pytest.raises(CaseError, match="mesh.file") as info:
        case_from_dict(base, source=tmp_path / "c.toml")
    why = {"300 characters": "bytes", "NUL": "NUL", "symlink loop": "loop", "fifo": "named pipe",
           "device": "device", "directory": "directory"}[what]
    assert why in str(info.value)


def test_pipes_and_devices_are_refused_wherever_a_file_is_read(tmp_path):
    from fvrans.case.load import read_toml
    from fvrans.checkpoint import read_checkpoint
    from fvrans.errors import MeshError
    from fvrans.mesh.io import read_mesh
    from fvrans.verify.spec import load_spec

    os.mkfifo(tmp_path / "pipe")
    with deadline():
        for reader, error in ((read_toml, CaseError), (read_mesh, MeshError), (read_checkpoint, CaseError),
                              (load_spec, CaseError)):
            for path in (tmp_path / "pipe", Path("/dev/zero")):
                with pytest.raises(error, match="named pipe|device"):
                    reader(path)
        assert main(["run", str(tmp_path / "pipe"), "--out", str(tmp_path / "o")]) == 2


def test_profiles_pipes_devices_and_oversized_files_are_refused(case_file, tmp_path):
    from fvrans.case.profile import MAX_PROFILE_BYTES

    big = tmp_path / "big.csv"
    with open(big, "wb") as f:
        f.truncate(MAX_PROFILE_BYTES + 1)  # sparse: no disk used
    os.mkfifo(tmp_path / "pipe.csv")
    base = load_case(case_file).to_dict()
    for profile, why in ((str(big), "MiB"), ("pipe.csv", "named pipe"), ("/dev/zero", "device")):
        base["boundary"]["walls"] = {"kind": "inflow-velocity", "profile": profile}
        with deadline(), pytest.raises(CaseError, match="boundary.walls.profile") as info:
            case_from_dict(base, source=tmp_path / "c.toml")
        assert why in str(info.value)


@pytest.mark.parametrize("depth", [40, 2000])
def test_deeply_nested_toml_is_refused(tmp_path, capsys, depth):
    p = tmp_path / "deep.toml"
    p.write_text("title = \"x\"\na = " + "[" * depth + "]" * depth + "\n")
    assert main(["run", str(p), "--out", str(tmp_path / "o")]) == 2
    assert "nested" in capsys.readouterr().err
    with pytest.raises(CaseError, match="nested"):
        deep: dict = {}
        node = deep
        for _ in range(depth):
            node["a"] = {}
            node = node["a"]
        case_from_dict(deep)


def _edit(path: Path, **changes):
    with np.load(path) as z:
        data = {k: z[k] for k in z.files}
    data.update(changes)
    for k in [k for k, v in changes.items() if v is None]:
        del data[k]
    np.savez(path, **data)


@pytest.mark.parametrize("change, needle", [
    ({"iteration": np.array(2**62)}, "iteration"),
    ({"iteration": np.array([3, 4])}, "iteration"),
    ({"iteration": np.array("three")}, "iteration"),
    ({"velocity": np.zeros((64, 3))}, "velocity has shape"),
    ({"velocity": np.zeros((10, 2))}, "pressure has shape"),
    ({"pressure": np.array(["a"] * 64)}, "pressure holds"),
    ({"face_flux": np.full(144, np.nan)}, "non-finite"),
    ({"history_rows": np.zeros((2, 2))}, "history_rows"),
    ({"history_seconds": np.zeros(99)}, "history_seconds"),
    ({"velocity_scale": np.array(-1.0)}, "velocity_scale"),
    ({"physics": np.array("{not json")}, "JSON"),
    ({"pressure_gradient": np.zeros((64, 5))}, "pressure_gradient"),
])
def test_hand_edited_checkpoints_are_refused(case_file, tmp_path, capsys, change, needle):
    out = tmp_path / "run"
    assert main(["run", str(case_file), "--out", str(out), "--quiet", "--no-plots"]) == 1  # 3 iterations
    _edit(out / "checkpoint.npz", **change)
    code = main(["run", str(case_file), "--out", str(tmp_path / "more"), "--quiet", "--restart", str(out)])
    err = capsys.readouterr().err
    assert code == 2 and needle in err and "not a valid checkpoint" in err, err
