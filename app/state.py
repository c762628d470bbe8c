"""The view state: everything that says what one person (or one review room) is looking at.

One ``param.Parameterized`` object that the page's parts read and write, that a
copied link carries, and that a shared review can hand to several sessions. It
holds no data: the data lives in the shared :class:`app.library.CaseLibrary`.

**The link.** Every parameter travels in the page's query string in one compact
form of our own, written by :func:`encode_query` and read back through one
validating parser, :func:`parse_query`. A value that does not parse, or is out
of range, is not taken: the default stays and a one-line message says so. The
region is ``box:W,E,S,N``; for an area drawn on a conformal chart,
``area:PROJ;lon,lat;lon,lat;lon,lat;lon,lat`` -- the four corners of the drawn
rectangle and the projection it was drawn in (its sides are straight there), so
that a drawn area makes a link of about a hundred characters; or, for a weather
system's region, ``circle:LON,LAT,RADIUS_KM``.
"""

from __future__ import annotations

import dataclasses
import math
import re

import numpy as np
import param

from balance_core import Region
from balance_core.scales import PRESETS

from . import wording
from .fields import FIELDS as _FIELDS

__all__ = [
    "ViewState",
    "FIELDS",
    "VECTORS",
    "PROJECTIONS",
    "URL_PARAMS",
    "field_label",
    "SEA_LEVEL",
    "is_sea_level",
    "level_text",
    "RegionSpec",
    "parse_region",
    "parse_box",
    "line_text",
    "parse_query",
    "encode_query",
    "SHEET_SCALES",
    "MAX_QUERY_VALUE",
]

#: Fields that can fill the chart: key -> label (the one table is :mod:`app.fields`).
FIELDS = _FIELDS

VECTORS = {
    "wind": "actual wind",
    "geostrophic": "geostrophic wind",
    "ageostrophic": "ageostrophic wind",
    "none": "no vectors",
}
#: A second field drawn as contours over the filled one (its interval is stated with it)
OVERLAYS = {
    "none": "none",
    "thickness": "1000-500 hPa thickness",
    "msl": "sea-level pressure",
    "isotachs": "isotachs",
    "temperature": "temperature",
}
#: How the vectors are drawn: arrows (in the page's wind units, with a reference arrow) or
#: wind barbs (in knots, the trade's convention)
VECTOR_STYLES = {"arrows": "arrows", "barbs": "barbs (kt)"}
PROJECTIONS = {
    "plate_carree": "plate carree (lon/lat)",
    "conformal": "conformal (Lambert or polar stereographic)",
}
#: The a priori scales the sheet lets you edit (the rest come from the preset).
SHEET_SCALES = ("U", "W", "L", "H", "dP", "rho", "lat0", "nu")

#: The parameters a page link carries (name in the link = parameter name).
URL_PARAMS = (
    "case",
    "level",
    "time",
    "field",
    "vectors",
    "vector_style",
    "overlay",
    "smooth_km",
    "min_lat",
    "region",
    "projection",
    "height_units",
    "wind_units",
    "preset",
    "sheet",
    "line",
)
#: Longest value taken from a link (a drawn area is about 110 characters).
MAX_QUERY_VALUE = 400


#: The view state's level for sea level (the sea-level pressure and the 10 m wind): no
#: pressure level is 0 hPa; a link writes it "msl".
SEA_LEVEL = 0.0


def is_sea_level(level) -> bool:
    """Is this view-state level sea level?"""
    return level is not None and float(level) == SEA_LEVEL


def level_text(level) -> str:
    """ "sea level" or "500 hPa"."""
    return "sea level" if is_sea_level(level) else f"{float(level):g} hPa"


def field_label(key: str) -> str:
    return FIELDS.get(key, key)


# -- the region -----------------------------------------------------------------------------

#: Projections a drawn area may name, and the parameters each takes (proj4 names).
_AREA_PROJ = {
    "lcc": ("lat_1", "lat_2", "lat_0", "lon_0", "R"),
    "stere": ("lat_0", "lat_ts", "lon_0", "R"),
    "merc": ("lat_ts", "lon_0", "R"),
    # a jet streak's region: a rectangle along the flow, straight in the azimuthal
    # equidistant projection centred on the streak's peak
    "aeqd": ("lat_0", "lon_0", "R"),
}
_NUM = r"[-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?"


def parse_box(vals):
    """[W, E, S, N] as floats if they make a box (:func:`app.inputs.parse_box`), else None."""
    from .inputs import InputError
    from .inputs import parse_box as parse

    try:
        return parse(vals)
    except (InputError, TypeError):
        return None


@dataclasses.dataclass(frozen=True)
class RegionSpec:
    """A region of the view: a lon/lat box, or an area drawn on a conformal chart."""

    kind: str  # "box", "area" or "circle"
    bounds: tuple = ()  # box: (W, E, S, N)
    corners: tuple = ()  # area: four (lon, lat) corners; circle: its centre
    proj: tuple = ()  # area: ("lcc", (("lat_1", 38.0), ...)) the chart's projection
    radius_km: float = 0.0  # circle: its radius

    def to_text(self) -> str:
        """The compact form carried by a link (see the module docstring)."""
        if self.kind == "box":
            return "box:" + ",".join(_short(v) for v in self.bounds)
        if self.kind == "circle":
            ((lon, lat),) = self.corners
            return f"circle:{_short(lon)},{_short(lat)},{_short(self.radius_km, 1)}"
        name, params = self.proj
        p = name + "".join(f",{k}={_short(v, 6)}" for k, v in params)
        return "area:" + ";".join([p] + [f"{_short(lo)},{_short(la)}" for lo, la in self.corners])

    def crs(self):
        import pyproj

        name, params = self.proj
        text = f"+proj={name} " + " ".join(f"+{k}={v!r}" for k, v in params) + " +units=m +no_defs"
        return pyproj.CRS.from_proj4(text)

    def outline(self, n: int = 40):
        """Lon/lat points along the region's edges (an area's sides are straight in its
        projection)."""
        if self.kind == "box":
            w, e, s, n_ = self.bounds
            if e < w:
                e += 360
            t = np.linspace(0, 1, n)
            lons = np.concatenate([w + (e - w) * t, np.full(n, e), e + (w - e) * t, np.full(n, w)])
            lats = np.concatenate(
                [np.full(n, s), s + (n_ - s) * t, np.full(n, n_), n_ + (s - n_) * t]
            )
            return lons, lats
        if self.kind == "circle":
            return _circle_outline(self.corners[0], self.radius_km, 4 * n)
        import pyproj

        crs = self.crs()
        fwd = pyproj.Transformer.from_crs(crs.geodetic_crs, crs, always_xy=True)
        inv = pyproj.Transformer.from_crs(crs, crs.geodetic_crs, always_xy=True)
        lo, la = np.array(self.corners).T
        x, y = fwd.transform(lo, la)
        t = np.linspace(0, 1, n, endpoint=False)
        xs = np.concatenate([x[i] + (x[(i + 1) % 4] - x[i]) * t for i in range(4)])
        ys = np.concatenate([y[i] + (y[(i + 1) % 4] - y[i]) * t for i in range(4)])
        lons, lats = inv.transform(xs, ys)
        return np.asarray(lons), np.asarray(lats)

    def region(self) -> Region:
        if self.kind == "box":
            return Region.box(*self.bounds)
        if self.kind == "circle":
            ((lon, lat),) = self.corners
            return Region.circle(lon, lat, self.radius_km)
        lons, lats = self.outline()
        ok = np.isfinite(lons) & np.isfinite(lats)
        return Region.polygon(lons[ok], lats[ok])

    def describe(self) -> str:
        if self.kind == "box":
            w, e, s, n = self.bounds
            return f"box {wording.lon(w)} to {wording.lon(e)}, {wording.lat(s)} to {wording.lat(n)}"
        if self.kind == "circle":
            ((lon, lat),) = self.corners
            return f"within {self.radius_km:.0f} km of {wording.lat(lat)} {wording.lon(lon)}"
        if self.proj[0] == "aeqd":
            params = dict(self.proj[1])
            return (
                f"area along the flow around {wording.lat(params['lat_0'])} "
                f"{wording.lon(params['lon_0'])}"
            )
        lons, lats = self.outline(8)
        return (
            f"drawn area {wording.lon(float(np.nanmin(lons)))} to "
            f"{wording.lon(float(np.nanmax(lons)))}, {wording.lat(float(np.nanmin(lats)))} to "
            f"{wording.lat(float(np.nanmax(lats)))}"
        )

    @property
    def bounds_box(self):
        """West, east, south, north of the region (an area's extent), for the typed fields."""
        if self.kind == "box":
            return tuple(self.bounds)
        if self.kind == "circle":
            r = self.region()
            return (r.west, r.east, r.south, r.north)
        lons, lats = self.outline(8)
        return (
            float(np.nanmin(lons)),
            float(np.nanmax(lons)),
            float(np.nanmin(lats)),
            float(np.nanmax(lats)),
        )


def _circle_outline(centre, radius_km, n):
    """Lon/lat points on a circle of the sphere (the destination-point formula on a
    sphere of the mean Earth radius, common practice)."""
    from balance_core.constants import EARTH_RADIUS

    lon0, lat0 = np.deg2rad(centre[0]), np.deg2rad(centre[1])
    d = radius_km * 1e3 / EARTH_RADIUS
    b = np.linspace(0, 2 * np.pi, n + 1)
    lat = np.arcsin(np.sin(lat0) * np.cos(d) + np.cos(lat0) * np.sin(d) * np.cos(b))
    lon = lon0 + np.arctan2(
        np.sin(b) * np.sin(d) * np.cos(lat0), np.cos(d) - np.sin(lat0) * np.sin(lat)
    )
    lon = np.rad2deg(lon)
    lon = np.rad2deg(np.unwrap(np.deg2rad(lon)))
    return lon, np.rad2deg(lat)


def _short(v, digits=4) -> str:
    """A number in few characters: at most ``digits`` decimals, no trailing zeros."""
    text = f"{float(v):.{digits}f}".rstrip("0").rstrip(".")
    return "0" if text in ("-0", "") else text


def area_from_crs(crs, corners) -> RegionSpec | None:
    """The area of a rectangle drawn in ``crs`` (a pyproj CRS) with these lon/lat corners."""
    import warnings

    with warnings.catch_warnings():  # the parameters asked for survive the proj4 form
        warnings.simplefilter("ignore", UserWarning)
        d = crs.to_dict()
    name = d.get("proj")
    if name not in _AREA_PROJ:
        return None
    params = []
    for k in _AREA_PROJ[name]:
        if k == "R":
            params.append(("R", float(d.get("R", d.get("a", 6371008.7714)))))
        elif k in d:
            params.append((k, float(d[k])))
    spec = RegionSpec(
        "area", corners=tuple((float(a), float(b)) for a, b in corners), proj=(name, tuple(params))
    )
    return parse_region(spec.to_text())[0]


def parse_region(text):
    """(RegionSpec or None, problem or None) from the compact text; '' is the whole case."""
    t = str(text or "").strip()
    if not t:
        return None, None
    if len(t) > MAX_QUERY_VALUE:
        return None, "the region in the link is too long"
    if t.startswith("box:"):
        parts = t[4:].split(",")
        if len(parts) == 4 and all(re.fullmatch(_NUM, p.strip()) for p in parts):
            b = parse_box(parts)
            if b is not None:
                return RegionSpec("box", bounds=tuple(b)), None
        return None, "the box in the link is not four numbers west, east, south, north"
    if t.startswith("circle:"):
        parts = t[7:].split(",")
        if len(parts) == 3 and all(re.fullmatch(_NUM, p.strip()) for p in parts):
            lon, lat, r = (float(p) for p in parts)
            if -540 <= lon <= 540 and -90 <= lat <= 90 and 1.0 <= r <= 20000.0:
                return RegionSpec("circle", corners=((lon, lat),), radius_km=r), None
        return None, "the circle in the link is not a longitude, a latitude and a radius in km"
    if t.startswith("area:"):
        pieces = t[5:].split(";")
        if len(pieces) == 5:
            head = pieces[0].split(",")
            name = head[0]
            allowed = _AREA_PROJ.get(name)
            params, ok = [], allowed is not None
            for kv in head[1:]:
                k, _, v = kv.partition("=")
                if not ok or k not in allowed or not re.fullmatch(_NUM, v):
                    ok = False
                    break
                params.append((k, float(v)))
            corners = []
            for c in pieces[1:]:
                xy = c.split(",")
                if len(xy) != 2 or not all(re.fullmatch(_NUM, q) for q in xy):
                    ok = False
                    break
                lo, la = float(xy[0]), float(xy[1])
                if not (-540 <= lo <= 540 and -90 <= la <= 90):
                    ok = False
                    break
                corners.append((lo, la))
            if ok and _proj_ok(name, dict(params)):
                return RegionSpec("area", corners=tuple(corners), proj=(name, tuple(params))), None
        return None, "the drawn area in the link cannot be read"
    return None, "the region in the link is neither a box, a drawn area nor a circle"


def _proj_ok(name, p) -> bool:
    lats = [p[k] for k in ("lat_0", "lat_1", "lat_2", "lat_ts") if k in p]
    if not all(-90 <= v <= 90 for v in lats) or not -540 <= p.get("lon_0", 0.0) <= 540:
        return False
    if not 6.0e6 <= p.get("R", 6371008.7714) <= 6.5e6:
        return False
    if name == "lcc" and not ("lat_1" in p and abs(p["lat_1"]) < 89.9):
        return False
    return True


# -- the state ----------------------------------------------------------------------------


class ViewState(param.Parameterized):
    """What one person is looking at. Round-trips through the page link."""

    case = param.String(default="", doc="name of the case shown")
    level = param.Number(
        default=500.0, bounds=(0.0, 1100.0), doc="pressure level, hPa; 0 (SEA_LEVEL) for sea level"
    )
    time = param.String(default="", doc="valid time, ISO 8601 (empty: the first)")
    field = param.Selector(default="height", objects=list(FIELDS), doc="the filled field")
    vectors = param.Selector(default="wind", objects=list(VECTORS), doc="the vectors drawn")
    vector_style = param.Selector(
        default="arrows", objects=list(VECTOR_STYLES), doc="arrows, or wind barbs in knots"
    )
    overlay = param.Selector(
        default="none", objects=list(OVERLAYS), doc="a second field drawn as contours"
    )
    smooth_km = param.Number(
        default=0.0, bounds=(0.0, 2000.0), doc="Gaussian smoothing of the inputs, km (0 = none)"
    )
    min_lat = param.Number(
        default=10.0,
        bounds=(0.0, 45.0),
        doc="quantities divided by f are masked this close to the equator",
    )
    region = param.String(
        default="",
        doc="the region in its compact form (box:W,E,S,N or area:...); empty = the whole case",
    )
    projection = param.Selector(default="plate_carree", objects=list(PROJECTIONS))
    height_units = param.Selector(default="m", objects=["m", "dam"])
    wind_units = param.Selector(default="m/s", objects=["m/s", "kt"])
    preset = param.Selector(
        default="synoptic_cyclone", objects=list(PRESETS), doc="the a priori scale sheet's preset"
    )
    sheet = param.Dict(default={}, doc="the scale sheet's edits: scale name -> value")
    line = param.String(
        default="",
        doc="the section's line, lon0,lat0,lon1,lat1 in degrees (empty: across the region)",
    )

    # -- the region ----------------------------------------------------------------
    def set_box(self, west, east, south, north):
        """A lon/lat box (degrees); west > east crosses the dateline."""
        b = parse_box([round(float(v), 4) for v in (west, east, south, north)])
        if b is None:
            raise ValueError("a box needs finite west, east, south, north with south < north")
        self.region = RegionSpec("box", bounds=tuple(b)).to_text()

    def set_circle(self, lon, lat, radius_km):
        """A weather system's region: within ``radius_km`` of (lon, lat)."""
        spec, problem = parse_region(f"circle:{_short(lon)},{_short(lat)},{_short(radius_km, 1)}")
        if spec is None:
            raise ValueError(problem)
        self.region = spec.to_text()

    def set_area(self, spec: RegionSpec):
        """An area drawn on a conformal chart (see :func:`area_from_crs`)."""
        self.region = spec.to_text()

    def clear_region(self):
        self.region = ""

    def region_spec(self) -> RegionSpec | None:
        """The parsed region, or None for the whole case."""
        return parse_region(self.region)[0]

    def region_text(self) -> str:
        spec = self.region_spec()
        return "whole case" if spec is None else spec.describe()

    # -- the link -------------------------------------------------------------------
    def values(self) -> dict:
        return {k: getattr(self, k) for k in URL_PARAMS}

    def to_query(self) -> dict:
        return encode_query(self.values())

    def update_from_query(self, query: dict, *, cases=None) -> list:
        """Take the valid values of a link; returns the one-line problems of the others."""
        values, problems = parse_query(query, cases=cases)
        if values:
            self.param.update(**values)
        return problems

    def copy(self) -> ViewState:
        return ViewState(
            **{k: (dict(v) if isinstance(v, dict) else v) for k, v in self.values().items()}
        )


def line_text(line) -> str:
    """A section's line as a link writes it: "lon0,lat0,lon1,lat1" to 4 decimals."""
    return ",".join(_short(float(v), 4) for v in line)


def encode_query(values: dict) -> dict:
    """The link's query parameters (all text) of a state's values."""
    out = {}
    for k in URL_PARAMS:
        v = values.get(k)
        if k == "line" and not v:
            continue  # no line of its own: a link says nothing of sections
        if k == "sheet":
            out[k] = ",".join(f"{n}={_short(x, 6)}" for n, x in sorted((v or {}).items()))
        elif k == "level" and v is not None and is_sea_level(v):
            out[k] = "msl"
        elif isinstance(v, float):
            out[k] = _short(v, 4)
        else:
            out[k] = "" if v is None else str(v)
    return out


def _first(raw):
    if isinstance(raw, (list, tuple)):
        raw = raw[0] if raw else ""
    if isinstance(raw, bytes):
        raw = raw.decode("utf-8", "replace")
    return str(raw)


def parse_query(query: dict, *, cases=None):
    """(values, problems): the valid parameters of a link, and a sentence per invalid one.

    ``cases`` (the names the server has) limits ``case``; every other parameter is
    checked against its own type, range and choices. Nothing raises.
    """
    values, problems = {}, []
    defaults = ViewState.param
    for k in URL_PARAMS:
        if k not in query:
            continue
        raw = _first(query[k])
        if len(raw) > MAX_QUERY_VALUE:
            problems.append(f"the link's {k} is too long; the default is shown")
            continue
        try:
            values[k] = _parse_one(k, raw, cases, defaults)
        except ValueError as exc:
            problems.append(f"the link's {k} {exc}; the default is shown")
    return values, problems


def _parse_one(k, raw, cases, defaults):
    p = defaults[k]
    shown = wording.quote(raw)
    if k == "case":
        if cases is not None and raw not in cases:
            raise ValueError(f"{shown} is not a case on this server")
        return raw
    if k == "time":
        from balance_core.io.case import iso, parse_time

        if raw == "":
            return ""
        t = parse_time(raw)
        if t is None:
            raise ValueError(f"{shown} is not an ISO 8601 time")
        return iso(t)
    if k == "region":
        spec, problem = parse_region(raw)
        if problem:
            raise ValueError(f"{shown} cannot be read ({problem})")
        return "" if spec is None else spec.to_text()
    if k == "sheet":
        return _parse_sheet(raw)
    if k == "line":
        if raw.strip() == "":
            return ""
        from .inputs import InputError, parse_line

        try:
            return line_text(parse_line(raw))
        except InputError as exc:
            raise ValueError(f"{shown} cannot be read ({exc})") from None
    if k == "level":
        if raw.strip().lower() in ("msl", "sea level", "sea_level"):
            return SEA_LEVEL
        if re.fullmatch(_NUM, raw.strip()) and not 1.0 <= float(raw) <= 1100.0:
            raise ValueError(f"{shown} is outside 1 to 1100 hPa (or msl, sea level)")
    if isinstance(p, param.Number):
        if not re.fullmatch(_NUM, raw.strip()):
            raise ValueError(f"{shown} is not a number")
        val = float(raw)
        lo, hi = p.bounds
        if not (math.isfinite(val) and lo <= val <= hi):
            raise ValueError(f"{shown} is outside {lo:g} to {hi:g}")
        return val
    if isinstance(p, param.Selector):
        if raw not in p.objects:
            raise ValueError(f"{shown} is not one of the choices")
        return raw
    raise ValueError("is not understood")


def _parse_sheet(raw) -> dict:
    out = {}
    if not raw.strip():
        return out
    for kv in raw.split(","):
        k, _, v = kv.partition("=")
        if (
            k not in SHEET_SCALES
            or not re.fullmatch(_NUM, v.strip())
            or not math.isfinite(float(v))
        ):
            raise ValueError(f"{wording.quote(kv)} is not a scale and a number")
        out[k] = float(v)
    return out
