"""Start the balance-desk server (Panel on Tornado) on files or a directory of cases."""

from __future__ import annotations

import glob
import logging
import os

import pyproj  # noqa: F401  (before anything that may load eccodes)

__all__ = ["serve", "case_paths"]

log = logging.getLogger("balance_desk")


def case_paths(files=None, cases_dir=None):
    """The files to load: the given ones, every case in a directory, or the sample cases."""
    if files:
        return list(files)
    from .cli import sample_dir

    d = cases_dir or sample_dir()
    paths = sorted(p for p in glob.glob(os.path.join(d, "*"))
                   if p.endswith((".nc", ".nc4", ".grib", ".grib2", ".grb", ".grb2", ".zarr")))
    return paths


def serve(files=None, cases_dir=None, host="127.0.0.1", port=5006, show=False, threaded=False):
    """Load the cases once and serve the dashboard; returns the server (blocks unless threaded)."""
    import panel as pn

    from .dashboard import make_session
    from .library import CaseLibrary

    logging.basicConfig(level=logging.INFO, format="%(asctime)s %(levelname)s %(message)s")
    paths = case_paths(files, cases_dir)
    library = CaseLibrary(paths)
    for lc in library.cases.values():
        if lc.error:
            log.warning("case %s not available: %s", lc.name, lc.error)
    pn.extension(notifications=False)
    address = f"http://{host}:{port}/"
    print(f"balance-desk: serving {len(library.cases)} case(s) at {address}", flush=True)
    server = pn.serve(lambda: make_session(library), address=host, port=port,
                      show=show, title="balance-desk", threaded=threaded,
                      websocket_origin=[f"{host}:{port}", f"localhost:{port}", f"127.0.0.1:{port}"],
                      start=True, print=False)
    return server
