"""The view state: everything that says what one person is looking at.

One ``param.Parameterized`` object, so the controls, the views, the page URL
and (later) a shared team session can all hang off the same thing. It holds
no data: the data lives in the shared :class:`app.library.CaseLibrary`.
"""

from __future__ import annotations

import json
import math

import param

from balance_core import TERMS
from balance_core.scales import PRESETS

__all__ = ["ViewState", "FIELDS", "VECTORS", "PROJECTIONS", "URL_PARAMS", "field_label"]

#: Fields that can fill the chart: key -> label (units are added by the view).
FIELDS = {
    "height": "Geopotential height",
    "speed": "Wind speed",
    "geostrophic_speed": "Geostrophic wind speed",
    "ageostrophic_speed": "Ageostrophic wind speed",
    "ageostrophic_fraction": "Ageostrophic fraction |V - Vg| / |V|",
    "rossby_local": "Local Rossby number |zeta / f|",
    "vorticity": "Relative vorticity",
    "omega": "Vertical motion (omega)",
    "temperature": "Temperature",
    **{f"term:{t}": f"|{t.replace('_', ' ')}|" for t in TERMS},
    "term:acceleration": "|total acceleration DV/Dt|",
    "term:centripetal": "|centripetal acceleration|",
}

VECTORS = {"wind": "actual wind", "geostrophic": "geostrophic wind",
           "ageostrophic": "ageostrophic wind", "none": "no vectors"}
PROJECTIONS = {"plate_carree": "plate carree (lon/lat)", "conformal": "conformal (Lambert or "
               "polar stereographic)"}

#: The parameters a page URL carries (name in the URL = parameter name).
URL_PARAMS = ("case", "level", "time", "field", "vectors", "smooth_km", "min_lat", "region",
              "projection", "height_units", "wind_units", "preset")


def field_label(key: str) -> str:
    return FIELDS.get(key, key)


class ViewState(param.Parameterized):
    """What one person is looking at. Round-trips through the page URL."""

    case = param.String(default="", doc="name of the case shown")
    level = param.Number(default=500.0, bounds=(1.0, 1100.0), doc="pressure level, hPa")
    time = param.String(default="", doc="valid time, ISO 8601 (empty: the first)")
    field = param.Selector(default="height", objects=list(FIELDS), doc="the filled field")
    vectors = param.Selector(default="wind", objects=list(VECTORS), doc="the vectors drawn")
    smooth_km = param.Number(default=0.0, bounds=(0.0, 2000.0),
                             doc="Gaussian smoothing of the inputs, km (0 = none)")
    min_lat = param.Number(default=10.0, bounds=(0.0, 45.0),
                           doc="quantities divided by f are masked this close to the equator")
    region = param.String(default="", doc="the region as JSON: "
                          '{"kind": "box", "bounds": [W, E, S, N]} or '
                          '{"kind": "polygon", "lons": [...], "lats": [...]}; empty = whole case')
    projection = param.Selector(default="plate_carree", objects=list(PROJECTIONS))
    height_units = param.Selector(default="m", objects=["m", "dam"])
    wind_units = param.Selector(default="m/s", objects=["m/s", "kt"])
    preset = param.Selector(default="synoptic_cyclone", objects=list(PRESETS),
                            doc="the a priori scale sheet's preset")

    # -- the region ----------------------------------------------------------------
    def set_box(self, west, east, south, north):
        """A lon/lat box (degrees); west > east crosses the dateline."""
        vals = [round(float(v), 4) for v in (west, east, south, north)]
        self.region = json.dumps({"kind": "box", "bounds": vals})

    def set_polygon(self, lons, lats):
        """A lon/lat polygon (the outline of a box drawn on a conformal map)."""
        self.region = json.dumps({"kind": "polygon",
                                  "lons": [round(float(x), 4) for x in lons],
                                  "lats": [round(float(y), 4) for y in lats]})

    def clear_region(self):
        self.region = ""

    def region_spec(self) -> dict | None:
        """The parsed region, or None for the whole case (bad JSON counts as none)."""
        if not self.region:
            return None
        try:
            spec = json.loads(self.region)
        except ValueError:
            return None
        if spec.get("kind") == "box" and len(spec.get("bounds", [])) == 4 and \
                all(isinstance(v, (int, float)) and math.isfinite(v) for v in spec["bounds"]):
            return spec
        if spec.get("kind") == "polygon" and len(spec.get("lons", [])) >= 3 and \
                len(spec.get("lons", [])) == len(spec.get("lats", [])):
            return spec
        return None

    def region_text(self) -> str:
        spec = self.region_spec()
        if spec is None:
            return "whole case"
        if spec["kind"] == "box":
            w, e, s, n = spec["bounds"]
            return f"box {_lon(w)} to {_lon(e)}, {_lat(s)} to {_lat(n)}"
        return (f"drawn area {_lon(min(spec['lons']))} to {_lon(max(spec['lons']))}, "
                f"{_lat(min(spec['lats']))} to {_lat(max(spec['lats']))}")

    # -- the URL ----------------------------------------------------------------------
    def to_query(self) -> dict:
        return {k: getattr(self, k) for k in URL_PARAMS}

    def update_from_query(self, query: dict):
        """Set parameters from URL query values (strings), ignoring ones that do not fit."""
        changes = {}
        for k in URL_PARAMS:
            if k not in query:
                continue
            raw = query[k]
            if isinstance(raw, (list, tuple)):
                raw = raw[0] if raw else ""
            if isinstance(raw, bytes):
                raw = raw.decode()
            p = self.param[k]
            try:
                if isinstance(p, param.Number):
                    val = float(raw)
                    lo, hi = p.bounds or (None, None)
                    if (lo is not None and val < lo) or (hi is not None and val > hi):
                        continue
                elif isinstance(p, param.Selector):
                    if raw not in p.objects:
                        continue
                    val = raw
                else:
                    val = str(raw)
            except (TypeError, ValueError):
                continue
            changes[k] = val
        if changes:
            self.param.update(**changes)
        return changes


def _lon(x):
    x = (float(x) + 180) % 360 - 180
    return f"{abs(x):.1f}{'E' if x >= 0 else 'W'}"


def _lat(y):
    return f"{abs(float(y)):.1f}{'N' if y >= 0 else 'S'}"
