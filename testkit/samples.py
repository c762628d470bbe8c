"""The real model files that ``make test`` fetches into .cache/ (``.ci/fetch-samples``), one
name each, and the one rule for a test that needs one that is missing: a failure under CI
(where make test has fetched it), a skip elsewhere."""

from __future__ import annotations

import os

import pytest

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
CACHE = os.path.join(ROOT, ".cache")
#: NCEP GFS 2.5-degree forecast, every level (pygrib's source distribution)
GFS = os.path.join(CACHE, "pygrib-samples", "gfs.t12z.pgrbf120.2p5deg.grib2")
#: NCEP Eta on its Lambert conformal grid (pygrib's source distribution)
ETA = os.path.join(CACHE, "pygrib-samples", "eta.grb")
#: ERA5 pressure levels with ensemble members (cfgrib's source distribution)
ERA5 = os.path.join(CACHE, "cfgrib-samples", "era5-levels-members.grib")


def need(path: str) -> str:
    """``path``, or the test fails (under CI) or is skipped (elsewhere) when it is missing."""
    if not os.path.exists(path):
        if os.environ.get("CI"):
            pytest.fail(f"{path} is missing: make test fetches it", pytrace=False)
        pytest.skip(f"{path} is missing (make test fetches it)")
    return path
