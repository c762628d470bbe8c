"""The fields the chart can fill: one table, that the field menu, the link, the chart and its
colour bar loop over.

Each :class:`ChartField` says its key (in the link), its label (in the menu and on the
chart), its colour scale, whether it needs the wind, and how to make its values (on the
case's grid, in the page's units) from a level's diagnostics. Adding a field is one entry
here.
"""

from __future__ import annotations

import dataclasses
import weakref
from collections.abc import Callable

import numpy as np

from balance_core import TERMS
from balance_core.balance_map import balance_map
from balance_core.io import CaseError

from . import wording

__all__ = ["ChartField", "CHART_FIELDS", "FIELDS", "field_values"]


@dataclasses.dataclass(frozen=True)
class ChartField:
    """One field of the chart.

    ``make(diag, state)`` returns (values on the case grid, units); ``scale`` is
    "sequential", "diverging", "log" or "classes" (the index of a balance class,
    :data:`balance_core.verdict.CLASSES`, coloured as the verdict's class); ``wind`` says
    that the field needs the wind (a file with heights alone has no such field).
    """

    key: str
    label: str
    scale: str
    make: Callable
    wind: bool = True


def _height(diag, state):
    if diag.surface:
        return diag.sea_level_pressure / 100.0, "hPa"
    return wording.height(diag.height, state.height_units)


def _speed(of):
    def make(diag, state):
        return wording.wind(of(diag), state.wind_units)

    return make


def _omega(diag, state):
    if diag.omega is None:
        raise CaseError("this case has no vertical motion (omega)")
    return diag.omega, "Pa s-1"


def _temperature(diag, state):
    if diag.temperature is None:
        raise CaseError("this case has no temperature" + (" at 2 m" if diag.surface else ""))
    return diag.temperature - 273.15, "degC"


#: the balance maps of the levels in use, by the diagnostics they came from (a diagnostics
#: object is cached by the library; the map goes with it)
_MAPS: dict = {}


def balance_map_of(diag):
    """:func:`balance_core.balance_map.balance_map` of a level (default thresholds, as the
    page's region verdict), computed once per diagnostics object."""
    found = _MAPS.get(id(diag))
    if found is not None and found[0]() is diag:
        return found[1]
    m = balance_map(diag)
    _MAPS[id(diag)] = (weakref.ref(diag), m)
    weakref.finalize(diag, _MAPS.pop, id(diag), None)
    return m


def _balance_here(diag, state):
    return balance_map_of(diag).classes.astype(np.float64), ""


def _term(name):
    def make(diag, state):
        t = diag.budget[name]
        if not t.available:
            raise CaseError(f"the {wording.term_name(name)} term is unavailable: {t.note}")
        return t.magnitude(), "m s-2"

    return make


CHART_FIELDS = (
    ChartField("height", wording.FIELD_NAMES["height"], "sequential", _height, wind=False),
    ChartField("speed", wording.FIELD_NAMES["speed"], "sequential", _speed(lambda d: d.speed)),
    ChartField(
        "geostrophic_speed",
        wording.FIELD_NAMES["geostrophic_speed"],
        "sequential",
        _speed(lambda d: d.geostrophic_speed),
        wind=False,
    ),
    ChartField(
        "ageostrophic_speed",
        wording.FIELD_NAMES["ageostrophic_speed"],
        "sequential",
        _speed(lambda d: np.hypot(d.u - d.ug, d.v - d.vg)),
    ),
    ChartField(
        "ageostrophic_fraction",
        wording.FIELD_NAMES["ageostrophic_fraction"],
        "sequential",
        lambda d, s: (np.clip(d.ageostrophic_fraction, 0, 2), ""),
    ),
    ChartField(
        "rossby_local",
        wording.FIELD_NAMES["rossby_local"],
        "log",
        lambda d, s: (d.rossby_local, ""),
    ),
    ChartField(
        "vorticity",
        wording.FIELD_NAMES["vorticity"],
        "diverging",
        lambda d, s: (d.vorticity * 1e5, "1e-5 s-1"),
    ),
    ChartField("omega", wording.FIELD_NAMES["omega"], "diverging", _omega),
    ChartField(
        "temperature", wording.FIELD_NAMES["temperature"], "sequential", _temperature, wind=False
    ),
    ChartField("balance_here", wording.FIELD_NAMES["balance_here"], "classes", _balance_here),
    *[
        ChartField(f"term:{t}", f"|{wording.term_name(t)}|", "log", _term(t))
        for t in (*TERMS, "acceleration", "centripetal")
    ],
)

#: key -> label, the menu's and the link's choices
FIELDS = {f.key: f.label for f in CHART_FIELDS}
_BY_KEY = {f.key: f for f in CHART_FIELDS}


def field_values(key, diag, state):
    """(values on the case grid, units, colour scale) of the field ``key``; CaseError with a
    sentence where the data cannot give it."""
    field = _BY_KEY.get(key)
    if field is None:
        raise CaseError(f"unknown field {wording.quote(key)}")
    if field.wind and diag.no_wind:
        raise CaseError(f"{diag.no_wind}, so the chart has no {field.label}")
    values, units = field.make(diag, state)
    return values, units, field.scale
