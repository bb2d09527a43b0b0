"""Boundary values as formulas in x, y and the case's [formula_constants]: parsing over a
whitelist (never eval), evaluation, errors naming file, key and token, round trips, and their use
on boundary faces (walls, inflow velocity and nu_tilde_ratio, outflow pressure)."""

from __future__ import annotations

import math
import sys

import numpy as np
import pytest

import fvrans.api as fa
from fvrans.case import case_from_dict, load_case
from fvrans.case.formula import FUNCTIONS, parse_formula
from fvrans.errors import CaseError

if sys.version_info >= (3, 11):
    import tomllib
else:  # pragma: no cover
    import tomli as tomllib

X = np.array([0.0, 0.5, 2.0])
Y = np.array([1.0, 0.25, -3.0])


@pytest.mark.parametrize("text, expected", [
    ("4 * U * y * (H - y) / H**2", 4 * 1.5 * Y * (0.4 - Y) / 0.4**2),
    ("-x + +y - (-2)", -X + Y + 2),
    ("sqrt(abs(x - y)) + exp(-x) * log(2) + sin(pi * x) * cos(y) + tanh(x)",
     np.sqrt(np.abs(X - Y)) + np.exp(-X) * math.log(2) + np.sin(math.pi * X) * np.cos(Y) + np.tanh(X)),
    ("min(x, y, 0.3) + max(x, y)", np.minimum(np.minimum(X, Y), 0.3) + np.maximum(X, Y)),
    ("2 ** 3 ** 2 / 64", np.full(3, 8.0)),  # ** binds right to left: 2 ** 9 / 64
    ("1e-3 * x", 1e-3 * X),
])
def test_formulas_evaluate_like_the_arithmetic_they_write(text, expected):
    f = parse_formula(text, {"U": 1.5, "H": 0.4}, "case.toml: boundary.inlet.velocity")
    np.testing.assert_allclose(f(X, Y), expected, rtol=1e-14)


@pytest.mark.parametrize("text, token", [
    ("x ^ 2", "^ (powers are written **)"),
    ("__import__('os').system('true')", "is not an allowed function"),
    ("x.real", "attribute access ('.real')"),
    ("[x][0]", "indexing"),
    ("x if y else 1", "if-else"),
    ("x < y", "comparisons"),
    ("x and y", "and / or"),
    ("lambda: 1", "lambda"),
    ("open('f')", "'open' is not an allowed function"),
    ("'text'", "is not a number"),
    ("True", "is not a number"),
    ("q * x", "unknown name 'q'"),
    ("x % 2", "the operator %"),
    ("sqrt(x, y)", "sqrt() takes 1 argument, got 2"),
    ("max(x)", "max() takes two or more arguments"),
    ("sin", "needs arguments in parentheses"),
    ("exp(x=1)", "takes no keyword arguments"),
    ("(x", "is not a valid formula"),
])
def test_what_a_formula_may_not_hold_is_refused_naming_the_token(text, token):
    with pytest.raises(CaseError) as info:
        parse_formula(text, {"U": 1.0}, "c.toml: boundary.inlet.velocity")
    msg = str(info.value)
    assert msg.startswith("c.toml: boundary.inlet.velocity: ") and token in msg
    assert "sqrt" in msg or "valid formula" in msg or "nests" in msg  # the allowed set is listed


def test_no_python_runs_and_huge_powers_are_not_finite_rather_than_slow():
    f = parse_formula("10 ** 10 ** 10", {}, "here")  # float64, not a Python big integer
    with pytest.raises(CaseError, match="non-finite value at"):
        f.values_at(X, Y)
    with pytest.raises(CaseError, match="characters"):
        parse_formula("x + " * 600 + "1", {}, "here")
    assert set(FUNCTIONS) == {"sqrt", "exp", "log", "sin", "cos", "tanh", "abs", "min", "max"}


def base_case(**boundary):
    b = {"inlet": {"kind": "inflow-velocity", "velocity": [1.0, 0.0]}, "outlet": {"kind": "outflow-pressure"},
         "lower_wall": {"kind": "wall"}, "upper_wall": {"kind": "wall"}}
    b.update(boundary)
    return {"mesh": {"generator": "channel", "parameters": {"length": 2.0, "height": 1.0, "nx": 4, "ny": 4}},
            "fluid": {"density": 1.0, "viscosity": 0.1}, "formula_constants": {"U_max": 1.5, "H": 1.0},
            "boundary": b}


def test_case_file_formulas_round_trip_and_follow_their_constants(tmp_path):
    text = """
[mesh]
generator = "channel"
parameters = { length = 2.0, height = 1.0, nx = 4, ny = 4 }
[fluid]
density = 1.0
viscosity = 0.1
[formula_constants]
U_max = 1.5
H = 1.0
[boundary.inlet]
kind = "inflow-velocity"
velocity = ["4 * U_max * y * (H - y) / H**2", 0.0]
nu_tilde_ratio = "3 + y"
[boundary.outlet]
kind = "outflow-pressure"
pressure = "-2 * y"
[boundary.lower_wall]
kind = "wall"
[boundary.upper_wall]
kind = "wall"
velocity = ["0.5 * U_max", 0]
"""
    path = tmp_path / "case.toml"
    path.write_text(text)
    case = load_case(path)
    assert case.constants == {"U_max": 1.5, "H": 1.0}
    d = case.to_dict()
    assert d["boundary"]["inlet"]["velocity"] == ["4 * U_max * y * (H - y) / H**2", 0.0]
    assert d["boundary"]["outlet"]["pressure"] == "-2 * y" and d["formula_constants"] == {"U_max": 1.5, "H": 1.0}
    assert case_from_dict(tomllib.loads(case.to_toml())) == case
    u, v = case.boundary_velocity("inlet", np.array([0.0, 0.0]), np.array([0.5, 0.25]))
    np.testing.assert_allclose(u, [1.5, 4 * 1.5 * 0.25 * 0.75]) and np.testing.assert_allclose(v, 0.0)
    faster = case.set("formula_constants.U_max", 3.0)  # a constant changes every formula using it
    assert faster.boundary_velocity("inlet", 0.0, 0.5)[0] == pytest.approx(3.0)
    assert faster != case
    # on the faces: the parabola averaged over each inlet face (Simpson), pressure and ratio at the centres
    p = fa.prepare(case)
    b = p.boundary
    inlet = p.mesh.patch("inlet")
    sl = slice(inlet.start - p.mesh.n_internal_faces, inlet.stop - p.mesh.n_internal_faces)
    y0, y1 = np.sort(p.mesh.points[p.mesh.face_points[inlet.start : inlet.stop]][:, :, 1], axis=1).T
    exact_mean = 6 * (y1**2 / 2 - y1**3 / 3 - y0**2 / 2 + y0**3 / 3) / (y1 - y0)  # 4 U_max y (1 - y), averaged
    np.testing.assert_allclose(b.velocity[sl, 0], exact_mean, rtol=1e-13)
    np.testing.assert_allclose(b.nu_tilde_ratio[sl], 3 + p.geom.face_centre[inlet.start : inlet.stop, 1])
    out = p.mesh.patch("outlet")
    np.testing.assert_allclose(b.pressure[out.start - p.mesh.n_internal_faces : out.stop - p.mesh.n_internal_faces],
                               -2 * p.geom.face_centre[out.start : out.stop, 1])


@pytest.mark.parametrize("change, words", [
    ({"formula_constants": {"x": 1.0}}, ["formula_constants.x", "reserved"]),
    ({"formula_constants": {"U": "1.0"}}, ["formula_constants.U", "finite number"]),
    ({"formula_constants": {"2U": 1.0}}, ["formula_constants.2U", "identifier"]),
    ({"boundary": {"inlet": {"kind": "inflow-velocity", "velocity": ["U_max * z", 0.0]}}},
     ["boundary.inlet.velocity (item 1)", "unknown name 'z'"]),
    ({"boundary": {"outlet": {"kind": "outflow-pressure", "pressure": "y ^ 2"}}},
     ["boundary.outlet.pressure", "^ (powers are written **)"]),
])
def test_formula_errors_name_file_and_key(change, words):
    data = base_case()
    for k, v in change.items():
        if k == "boundary":
            data["boundary"].update(v)
        else:
            data[k] = v
    with pytest.raises(CaseError) as info:
        case_from_dict(data)
    assert all(w in str(info.value) for w in words), str(info.value)


def test_formula_values_are_checked_on_the_mesh():
    """Against the mesh: a wall velocity must run along the wall, values must be finite, a
    nu_tilde_ratio formula must not go negative."""
    across = case_from_dict(base_case(lower_wall={"kind": "wall", "velocity": ["1.0", "0.5 * x"]}))
    with pytest.raises(CaseError, match="crosses the wall"):
        fa.prepare(across)
    along = case_from_dict(base_case(lower_wall={"kind": "wall", "velocity": ["x", "0 * y"]}))
    fa.prepare(along)
    bad = case_from_dict(base_case(inlet={"kind": "inflow-velocity", "velocity": ["1 / (y - 0.625)", 0.0]}))
    with pytest.raises(CaseError, match=r"non-finite .* at \(0, 0.625\)"):
        fa.prepare(bad)
    negative = case_from_dict(base_case(inlet={"kind": "inflow-velocity", "velocity": [1.0, 0.0],
                                               "nu_tilde_ratio": "1 - 2 * y"}))
    with pytest.raises(CaseError, match="nu_tilde_ratio.*< 0"):
        fa.prepare(negative)
