"""The model interface below the loop: registry, variables in Fields, the explicit extra-stress
path of the momentum equation, and a loop that knows no model by name."""

from __future__ import annotations

import ast
from pathlib import Path

import numpy as np
import pytest
from scipy.integrate import cumulative_trapezoid

import fvrans.api as fa
from fvrans.case import schema
from fvrans.errors import CaseError
from fvrans.fields import Fields
from fvrans.mesh.generate import channel
from fvrans.mesh.geometry import compute_geometry
from fvrans.models import model_class, model_names, register_model, residual_names
from fvrans.models.base import TurbulenceModel
from fvrans.physics.boundary import build_flow_boundary
from fvrans.solve.simple import SimpleSolver, SolverControls

ROOT = Path(__file__).resolve().parents[2]


def test_every_model_a_case_may_choose_is_registered():
    assert set(model_names()) >= set(schema.TURBULENCE_MODELS)
    for key in schema.TURBULENCE_MODELS:
        cls = model_class(key)
        assert cls.key == key and issubclass(cls, TurbulenceModel)
    with pytest.raises(CaseError, match="'no-such-model' is not a known model; use one of 'none'"):
        model_class("no-such-model")


def test_a_registered_model_gives_its_residual_names():
    class Quiet(TurbulenceModel):
        key = "quiet-test-model"
        names = ("q",)

    register_model(Quiet.key, Quiet)
    case = fa.load_case(ROOT / "cases" / "cavity_re100.toml")
    assert residual_names(case) == ["u", "v", "continuity"]
    assert model_class("quiet-test-model") is Quiet
    with pytest.raises(TypeError):
        register_model("bad", object)


def _code_words(path: Path) -> set[str]:
    """Names, attributes, imported modules and string constants of a module (docstrings left out)."""
    tree = ast.parse(path.read_text())
    docs = {id(n.body[0].value) for n in ast.walk(tree)
            if isinstance(n, (ast.Module, ast.FunctionDef, ast.ClassDef)) and n.body
            and isinstance(n.body[0], ast.Expr) and isinstance(n.body[0].value, ast.Constant)}
    words: set[str] = set()
    for n in ast.walk(tree):
        if isinstance(n, ast.Name):
            words.add(n.id)
        elif isinstance(n, ast.Attribute):
            words.add(n.attr)
        elif isinstance(n, ast.Constant) and isinstance(n.value, str) and id(n) not in docs:
            words.add(n.value)
        elif isinstance(n, (ast.Import, ast.ImportFrom)):
            words.update(a.name for a in n.names)
            words.add(getattr(n, "module", None) or "")
    return {w.lower() for w in words}


def test_the_loop_and_the_api_know_no_model_by_name():
    for path in [*(ROOT / "fvrans" / "solve").glob("*.py"), ROOT / "fvrans" / "api.py",
                 ROOT / "fvrans" / "checkpoint.py", ROOT / "fvrans" / "fields.py"]:
        words = _code_words(path)
        for word in ("spalart", "nu_tilde", "sst", "omega"):
            assert not [w for w in words if word in w], f"{path.name} uses {word!r} in its code"


def test_initialise_fills_missing_variables_and_drops_foreign_ones():
    class Two(TurbulenceModel):
        variables = ("a", "b")

        def initial_values(self):
            return {"a": np.full(3, 1.0), "b": np.full(3, 2.0)}

    f = Fields.uniform(3, 5)
    f.variables = {"a": np.array([5.0, 6.0, 7.0]), "nu_tilde": np.ones(3), "b": np.ones(4)}
    Two().initialise(f)
    assert list(f.variables) == ["a", "b"]
    np.testing.assert_array_equal(f.variables["a"], [5.0, 6.0, 7.0])  # kept (right size)
    np.testing.assert_array_equal(f.variables["b"], [2.0, 2.0, 2.0])  # wrong size: started afresh
    g = f.copy()
    g.variables["a"][0] = -1.0
    assert f.variables["a"][0] == 5.0 and f.is_finite()


# -- the explicit extra stress ------------------------------------------------------------------
H, L, U, MU = 1.0, 6.0, 1.0, 0.02


def extra_viscosity(y: np.ndarray) -> np.ndarray:
    """A viscosity that vanishes on both walls like a Reynolds stress: mu_x = 4 mu y (h - y) / h^2."""
    return 4.0 * MU * y * (H - y) / H**2


class ImplicitExtra(TurbulenceModel):
    """mu_x as an eddy viscosity (the implicit path)."""

    def __init__(self, y):
        self.mu_t = extra_viscosity(y)

    def eddy_viscosity(self, fields):
        return self.mu_t


class ExplicitExtra(ImplicitExtra):
    """The same stress 2 mu_x S handed to the momentum equation as an explicit extra stress."""

    def eddy_viscosity(self, fields):
        return None

    def extra_stress(self, fields, grad_u):
        g = grad_u
        return np.stack([2 * self.mu_t * g[:, 0, 0], self.mu_t * (g[:, 0, 1] + g[:, 1, 0]),
                         2 * self.mu_t * g[:, 1, 1]], axis=1)


def developed_profile(y: np.ndarray) -> tuple[np.ndarray, float]:
    """Fully developed flow with viscosity mu + mu_x(y) and mean velocity U: (mu + mu_x) du/dy =
    G (y - h/2), u(0) = 0, G = dp/dx fixed by the flow rate (exact, by quadrature)."""
    s = np.linspace(0.0, H, 20001)
    shape = cumulative_trapezoid((s - H / 2) / (MU + extra_viscosity(s)), s, initial=0.0)
    g = U * H / np.trapezoid(shape, s)
    return g * np.interp(y, s, shape), g


@pytest.mark.parametrize("model_cls", [ImplicitExtra, ExplicitExtra], ids=["implicit", "explicit"])
def test_explicit_extra_stress_gives_the_developed_channel_flow(model_cls):
    mesh = channel(L, H, 60, 40)
    geom = compute_geometry(mesh)
    specs = {"inlet": {"kind": "inflow-velocity", "velocity": [U, 0.0]},
             "outlet": {"kind": "outflow-pressure", "pressure": 0.0},
             "lower_wall": {"kind": "wall"}, "upper_wall": {"kind": "wall"}}
    bc = build_flow_boundary(mesh, geom, specs)
    solver = SimpleSolver(mesh, geom, bc, rho=1.0, mu=MU, controls=SolverControls(tolerance=1e-8),
                          model=model_cls(geom.cell_centre[:, 1]))
    assert solver.run(max_iterations=3000)
    xc = geom.cell_centre
    band = np.abs(xc[:, 0] - 5.0) < 0.06
    exact, dpdx = developed_profile(xc[band, 1])
    u = solver.fields.velocity[band, 0]
    l2 = np.sqrt(np.mean((u - exact) ** 2))
    assert l2 < 0.003 * U  # 40 cells across: both paths 0.0016-0.0018 U (without the stress: 0.08 U)
    core = (xc[:, 0] > 3.5) & (xc[:, 0] < 5.5)
    slope = np.polyfit(xc[core, 0], solver.fields.pressure[core], 1)[0]
    assert slope == pytest.approx(dpdx, rel=0.007)  # 0.4-0.5 % (without the stress: 26 %)


def test_checkpoint_carries_the_model_variables_and_reads_the_first_format(tmp_path):
    import fvrans.checkpoint as ck

    case = fa.load_case(ROOT / "cases" / "flat_plate_turbulent.toml").replace(
        {"mesh.file": str(ROOT / "meshes" / "flat_plate_coarse.msh"), "solver.max_iterations": 2})
    r = fa.solve(case)
    path = r.write_checkpoint(tmp_path / "a.npz")
    back = ck.read_checkpoint(path)
    np.testing.assert_array_equal(back.fields.variables["nu_tilde"], r.fields.variables["nu_tilde"])
    # the first format stored the one model variable under its own name
    with np.load(path) as z:
        data = {k: z[k] for k in z.files}
    data["nu_tilde"] = data.pop("variable.nu_tilde")
    data["format_version"] = np.array(1)
    np.savez(tmp_path / "old.npz", **data)
    old = ck.read_checkpoint(tmp_path / "old.npz")
    np.testing.assert_array_equal(old.fields.variables["nu_tilde"], r.fields.variables["nu_tilde"])
    again = fa.solve(case, restart=old)
    assert again.iterations == 4
