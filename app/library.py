"""What every browser session shares: the loaded cases and one cache of diagnostics.

A case is opened once per server; the diagnostics of a (case, level, time,
smoothing, tropical mask) are computed once behind a lock and handed to every
session that asks, so a second session of the same case costs only its own
view state. Heavy work runs in the fair pool of :mod:`app.work`, off the
server's event loop, so one user's level change does not stall another's page.
"""

from __future__ import annotations

import collections
import dataclasses
import logging
import os
import threading

import pyproj  # noqa: F401  (before anything that may load eccodes)

from balance_core.io import CaseError, diagnostics_for, open_case, sea_level_diagnostics_for
from balance_core.io.errors import printable

__all__ = ["CaseLibrary", "LoadedCase", "SEA_LEVEL_INDEX"]

#: The level index that stands for sea level (the surface budget) in the shared caches.
SEA_LEVEL_INDEX = -1

log = logging.getLogger(__name__)


@dataclasses.dataclass
class LoadedCase:
    """A case, or the sentence saying why it could not be loaded."""

    name: str
    path: str
    case: object | None
    error: str | None = None


class _LRU:
    """A small thread-safe least-recently-used cache with one lock per key."""

    _MISSING = object()

    def peek(self, key, default=None):
        """The value of ``key`` if it is there (made), else ``default``; never makes it."""
        with self._lock:
            if key in self._data:
                self._data.move_to_end(key)
                return self._data[key]
            return default

    def __init__(self, size: int):
        self.size = size
        self._data = collections.OrderedDict()
        self._lock = threading.Lock()
        self._key_locks: dict = {}

    def get_or_make(self, key, make):
        with self._lock:
            if key in self._data:
                self._data.move_to_end(key)
                return self._data[key]
            klock = self._key_locks.setdefault(key, threading.Lock())
        with klock:  # one computation per key, however many sessions ask
            with self._lock:
                if key in self._data:
                    return self._data[key]
            value = make()
            with self._lock:
                self._data[key] = value
                while len(self._data) > self.size:
                    self._data.popitem(last=False)
                self._key_locks.pop(key, None)
            return value


class CaseLibrary:
    """The cases a server shows, loaded once, and their shared diagnostics cache."""

    def __init__(self, paths, *, cache_size: int = 24, memory_budget=None):
        from .cases import case_names

        self.cases: dict = {}
        for p, name in zip(paths, case_names(paths)):
            try:
                case = open_case(p, name=name, memory_budget=memory_budget)
                self.cases[name] = LoadedCase(name, str(p), case)
            except CaseError as exc:
                log.warning("could not load %s: %s", printable(str(p)), exc)
                self.cases[name] = LoadedCase(name, str(p), None, str(exc))
            except Exception as exc:
                log.exception("could not load %s", printable(str(p)))
                self.cases[name] = LoadedCase(
                    name,
                    str(p),
                    None,
                    f"{printable(os.path.basename(str(p)))}: could not "
                    f"be read ({type(exc).__name__})",
                )
        self._diag = _LRU(cache_size)
        self._profiles = _LRU(cache_size * 4)
        self._views = _LRU(cache_size * 4)
        self._masked = _LRU(8)

    @property
    def good(self) -> list:
        """Names of the cases that loaded."""
        return [n for n, lc in self.cases.items() if lc.case is not None]

    @property
    def failed(self) -> dict:
        """Name -> sentence of the cases that did not load."""
        return {n: lc.error for n, lc in self.cases.items() if lc.case is None}

    @classmethod
    def from_cases(cls, cases, *, cache_size: int = 24) -> CaseLibrary:
        """A library of already opened cases (tests, benchmarks)."""
        lib = cls([], cache_size=cache_size)
        for c in cases:
            lib.cases[c.name] = LoadedCase(c.name, c.paths[0] if c.paths else c.name, c)
        return lib

    @property
    def names(self) -> list:
        return list(self.cases)

    def get(self, name: str):
        """The Case of ``name``; raises CaseError with the load error if it failed."""
        lc = self.cases.get(name)
        if lc is None:
            raise CaseError(f"no case called {name!r} on this server")
        if lc.case is None:
            raise CaseError(f"this case could not be loaded: {lc.error}")
        return lc.case

    def diagnostics(
        self,
        name: str,
        level_index: int,
        time_index: int,
        smooth_km: float = 0.0,
        min_lat: float = 10.0,
    ):
        """LevelDiagnostics, computed once per key for every session (``level_index``
        :data:`SEA_LEVEL_INDEX`: the surface budget at sea level)."""
        key = self._diag_key(name, level_index, time_index, smooth_km, min_lat)

        def make():
            case = self.case_for(name, min_lat)
            if level_index == SEA_LEVEL_INDEX:
                return sea_level_diagnostics_for(case, time_index, smooth_km or None)
            return diagnostics_for(case, level_index, time_index, smooth_km or None)

        return self._diag.get_or_make(key, make)

    def band_diagnostics(
        self,
        name: str,
        level_index: int,
        time_index: int,
        min_lat: float,
        band: tuple,
    ):
        """LevelDiagnostics of the unsmoothed flow on rows ``band`` = (j0, j1) of the case
        (:meth:`balance_core.io.case.Case.rows`), computed once per key for every session."""
        j0, j1 = int(band[0]), int(band[1])
        key = self._diag_key(name, level_index, time_index, 0.0, min_lat) + (("rows", j0, j1),)

        def make():
            case = self.case_for(name, min_lat).rows(j0, j1)
            return diagnostics_for(case, level_index, time_index, None)

        return self._diag.get_or_make(key, make)

    def diagnostics_ready(
        self,
        name: str,
        level_index: int,
        time_index: int,
        smooth_km: float = 0.0,
        min_lat: float = 10.0,
    ):
        """The LevelDiagnostics of :meth:`diagnostics` if they were made already, else None
        (never makes them)."""
        return self._diag.peek(self._diag_key(name, level_index, time_index, smooth_km, min_lat))

    @staticmethod
    def _diag_key(name, level_index, time_index, smooth_km, min_lat):
        return (name, int(level_index), int(time_index), float(smooth_km or 0), float(min_lat))

    def case_for(self, name: str, min_lat: float = 10.0):
        """The case with its grid's tropical mask at ``min_lat`` (made once per value)."""
        case = self.get(name)
        if case.grid.min_lat == min_lat:
            return case
        return self._masked.get_or_make(
            (name, float(min_lat)),
            lambda: dataclasses.replace(case, grid=case.grid.with_min_lat(min_lat)),
        )

    def profile(self, key, make):
        """A shared cache for per-box summaries (through the levels, through the times)."""
        return self._profiles.get_or_make(key, make)

    def profile_ready(self, key):
        """The shared summary of ``key`` if it was made already, else None."""
        return self._profiles.peek(key)

    def view_ready(self, key):
        """The shared view of ``key`` if it was computed already, else None."""
        return self._views.peek(key)

    def view(self, key, make):
        """A shared cache of what a view shows (a chart, a region's report), so that every
        session showing the same view -- a review room's followers -- gets it computed once."""
        return self._views.get_or_make(key, make)
