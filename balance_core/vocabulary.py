"""The plain words of the trade for every term, balance and scale: one table, used everywhere.

The code names (``metric_uv``, ``pressure_gradient``) are the keys of the JSON
object and nothing else; the verdict's sentences, the command line's tables, the
page's ranking, field menu, chart titles and exports all say these words.
"""

from __future__ import annotations

import dataclasses

__all__ = [
    "TERM_NAMES",
    "BalanceClass",
    "BALANCE_CLASSES",
    "BALANCE_NAMES",
    "SCALE_NAMES",
    "PRESET_NAMES",
    "SYSTEM_NAMES",
    "PART_NAMES",
    "term_name",
]

#: Terms of the momentum equations and their derived views.
TERM_NAMES = {
    "tendency": "local tendency",
    "horizontal_advection": "horizontal advection",
    "vertical_advection": "vertical advection",
    "metric_uv": "Earth curvature (uv)",
    "metric_uw": "Earth curvature (uw)",
    "coriolis": "Coriolis",
    "coriolis_w": "vertical Coriolis",
    "pressure_gradient": "pressure gradient",
    "residual": "residual",
    "acceleration": "total acceleration DV/Dt",
    "along_stream": "along-stream acceleration",
    "centripetal": "centripetal acceleration",
    "centripetal_trajectory": "centripetal acceleration (trajectory)",
    "viscous": "friction (eddy viscosity)",
}


@dataclasses.dataclass(frozen=True)
class BalanceClass:
    """One class a verdict can take, and how every output shows it.

    ``terms``: for a candidate balance, the budget terms whose vector sum it tests
    (None for the other classes); ``colour``: the fill of its marks and bars (the
    Okabe-Ito palette, safe for colour-blind readers; black and grey for the rest);
    ``column``: the name of its imbalance ratio in the tables (CSV, batch, archive).
    """

    name: str
    display: str
    colour: str
    terms: tuple | None = None

    @property
    def column(self) -> str | None:
        return None if self.terms is None else f"ratio_{self.name}"


#: The classes of a verdict, candidate balances first and simplest first (the verdict
#: takes them in this order). Adding a balance here is all that the report, the tables,
#: the page and the archive need; its rule goes in :mod:`balance_core.verdict`.
BALANCE_CLASSES = (
    BalanceClass("geostrophic", "Geostrophic", "#0072B2", ("pressure_gradient", "coriolis")),
    BalanceClass("cyclostrophic", "Cyclostrophic", "#D55E00", ("pressure_gradient", "centripetal")),
    BalanceClass(
        "gradient", "Gradient", "#009E73", ("pressure_gradient", "coriolis", "centripetal")
    ),
    BalanceClass(
        "frictional", "Frictional", "#E69F00", ("pressure_gradient", "coriolis", "residual")
    ),
    BalanceClass("unsteady", "Unsteady", "#CC79A7"),
    BalanceClass("unbalanced", "Unbalanced", "#000000"),
    BalanceClass("none", "No verdict", "#8c8c8c"),
)
#: Balance classes of a verdict: code name -> display name.
BALANCE_NAMES = {b.name: b.display for b in BALANCE_CLASSES}

#: Scales of the a priori analysis.
SCALE_NAMES = {
    "U": "velocity U",
    "W": "vertical velocity W",
    "L": "length L",
    "H": "depth H",
    "dP": "pressure difference dP",
    "rho": "density rho",
    "lat0": "latitude",
    "f0": "Coriolis parameter f0",
    "nu": "viscosity nu",
    "a": "Earth radius a",
    "n2": "N^2",
}

#: Scale presets, by their key in balance_core.scales.PRESETS.
PRESET_NAMES = {
    "planetary_wave": "Planetary wave",
    "synoptic_cyclone": "Synoptic cyclone",
    "front": "Front",
    "mesoscale_convective_system": "Mesoscale convective system",
    "tropical_cyclone": "Tropical cyclone",
    "sea_breeze": "Sea breeze",
    "tornado": "Tornado",
    "boundary_layer": "Boundary layer",
}


#: Kinds of weather system (balance_core.systems).
SYSTEM_NAMES = {"low": "closed low", "high": "closed high", "jet_streak": "jet streak"}

#: Parts of the ageostrophic wind (balance_core.budget.ageostrophic_parts).
PART_NAMES = {
    "tendency": "tendency (local change of the wind)",
    "inertial_advective": "inertial-advective",
    "vertical_advection": "vertical advection",
    "remainder": "remainder (curvature, friction, unresolved)",
    "isallobaric": "isallobaric wind (from the height tendency; not one of the parts)",
}


def term_name(code: str) -> str:
    """The display name of a term or view (the code name itself if it has none)."""
    return TERM_NAMES.get(code, code.replace("_", " "))
