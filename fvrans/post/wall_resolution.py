"""Is a turbulent run's wall mesh fine enough for a model integrated to the wall?

The Spalart-Allmaras model as fvrans solves it has no wall functions: its no-slip condition and
wall damping assume the first cell centre lies in the viscous sublayer, where u+ = y+. That
sublayer ends at y+ of about 5 (Pope, Turbulent Flows, 2000, sec. 7.1.4; from memory); the usual
target is a first-cell y+ of about 1 (common practice). Beyond y+ ~ 5 the one-sided wall
gradient tau_w = mu u_P / d misses the steep sublayer profile and the friction comes out far too
low (a plate meshed at first-cell y+ ~ 33 gave a drag 56 % low).

For each wall patch: first-cell y+ (at the cell centre, as in :mod:`fvrans.post.wall`) max and
mean, the share of faces above :data:`Y_PLUS_LIMIT`, and the first-cell height that would give
y+ = 1: the centre at nu / u_tau from the wall with the local friction velocity, i.e. a cell
height 2 nu / u_tau for a cell whose centre lies half-way up (quads, prisms of a wall layer);
the number reported is the 5th percentile over the patch (what 95 % of its faces need). The
warning fires when more than :data:`SHARE_LIMIT` of a patch's faces lie above the limit, so
that a few faces at a singular point (a plate's leading edge) do not trigger it.
"""

from __future__ import annotations

from dataclasses import asdict, dataclass
from typing import Any

import numpy as np

from fvrans.post.wall import WallData

#: first-cell y+ above which the cell centre lies outside the viscous sublayer (Pope 2000, from memory)
Y_PLUS_LIMIT = 5.0
#: share of a patch's faces above the limit that makes the warning fire (common practice: a few
#: faces at a singularity or a stagnation point aside, the whole wall should be resolved)
SHARE_LIMIT = 0.1
#: the first-cell y+ a model integrated to the wall is meshed for (common practice)
Y_PLUS_TARGET = 1.0


@dataclass(frozen=True)
class WallResolution:
    """First-cell y+ figures of a wall patch and the height that would give y+ = 1."""

    patch: str
    y_plus_max: float
    y_plus_mean: float
    y_plus_limit: float
    share_above: float
    first_cell_height_for_y_plus_1: float
    first_cell_height: float

    @property
    def too_coarse(self) -> bool:
        return self.share_above > SHARE_LIMIT

    def as_dict(self) -> dict[str, Any]:
        d = asdict(self)
        d.pop("patch")
        d["too_coarse"] = self.too_coarse
        return d

    def warning(self, model: str = "the turbulence model") -> str:
        """The terminal warning for a patch that is too coarse ("" when it is not)."""
        if not self.too_coarse:
            return ""
        return (
            f"wall patch {self.patch!r}: first-cell y+ up to {self.y_plus_max:.3g} (mean {self.y_plus_mean:.3g}, "
            f"{100 * self.share_above:.0f} % of its faces above {self.y_plus_limit:g}); {model} is integrated to "
            f"the wall and needs y+ ~ {Y_PLUS_TARGET:g}: a first-cell height of about "
            f"{self.first_cell_height_for_y_plus_1:.2g} (now {self.first_cell_height:.2g}) would serve; wall "
            "friction and drag of this run are unreliable"
        )


def wall_resolution(wall: WallData) -> WallResolution:
    """The first-cell y+ figures of one wall patch (module docstring)."""
    yp = np.asarray(wall.y_plus, dtype=float)
    if len(yp) == 0:
        nan = float("nan")
        return WallResolution(wall.patch, nan, nan, Y_PLUS_LIMIT, 0.0, nan, nan)
    nu = wall.mu / wall.rho
    u_tau = np.asarray(wall.u_tau, dtype=float)
    sheared = u_tau > 0.0
    height = 2.0 * nu / u_tau[sheared] * Y_PLUS_TARGET
    return WallResolution(
        patch=wall.patch,
        y_plus_max=float(np.max(yp)),
        y_plus_mean=float(np.mean(yp)),
        y_plus_limit=Y_PLUS_LIMIT,
        share_above=float(np.mean(yp > Y_PLUS_LIMIT)),
        first_cell_height_for_y_plus_1=float(np.percentile(height, 5)) if len(height) else float("inf"),
        first_cell_height=float(np.median(2.0 * wall.d_perp)),
    )


__all__ = ["SHARE_LIMIT", "Y_PLUS_LIMIT", "Y_PLUS_TARGET", "WallResolution", "wall_resolution"]
