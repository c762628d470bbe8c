"""Every environment variable balance-desk reads, in one table, read when asked.

Each setting is read at the moment it is needed (never at import), so a test or
a server started with a changed environment sees its own values. A value that
cannot be used is refused with one sentence that names the variable.

=================================  =======================================================
``BALANCE_DESK_MEMORY_BUDGET``     memory one level may use (``4G``, ``512M``, bytes);
                                   default a quarter of the machine's memory
``BALANCE_DESK_STORE``             the review rooms' SQLite file; default
                                   ``rooms.sqlite`` in the user's data folder
``BALANCE_DESK_PASSPHRASE``        the server's access passphrase (12 characters or more)
                                   when no ``--passphrase-file`` is given
``BALANCE_DESK_NOTES_PER_MINUTE``  notes one person may write per minute in a room
                                   (default 20)
``BALANCE_DESK_ROOM_PEOPLE``       people one review room holds at once (default 60)
``BALANCE_DESK_LOG``               the server's log level (``INFO``; ``DEBUG`` adds page
                                   timings)
``BALANCE_DESK_BATCH_NO_WORKER_S`` seconds a batch run waits with no worker left before it
                                   stops, keeping the pieces done (default 120)
``BALANCE_DESK_SAMPLES``           the folder of the third-party GRIB samples the tests
                                   read (default ``.cache/cfgrib-samples``)
``BALANCE_DESK_TEST_CHART_LOADS``  page loads a case of the tests' chart-draws check (default
                                   2; more for a soak run)
=================================  =======================================================
"""

from __future__ import annotations

import dataclasses
import logging
import os
from collections.abc import Mapping

__all__ = ["Setting", "SETTINGS", "SettingError", "text", "whole_number", "seconds", "log_level"]


class SettingError(ValueError):
    """An environment variable holds a value that cannot be used (one sentence)."""


@dataclasses.dataclass(frozen=True)
class Setting:
    """One environment variable: its name, its default (None: none) and what it sets."""

    name: str
    default: str | None
    meaning: str


SETTINGS: dict[str, Setting] = {
    s.name: s
    for s in (
        Setting("BALANCE_DESK_MEMORY_BUDGET", None, "memory one level may use"),
        Setting("BALANCE_DESK_STORE", None, "the review rooms' SQLite file"),
        Setting("BALANCE_DESK_PASSPHRASE", None, "the server's access passphrase"),
        Setting("BALANCE_DESK_NOTES_PER_MINUTE", "20", "notes per person per minute"),
        Setting("BALANCE_DESK_ROOM_PEOPLE", "60", "people one review room holds at once"),
        Setting("BALANCE_DESK_LOG", "INFO", "the server's log level"),
        Setting("BALANCE_DESK_BATCH_NO_WORKER_S", "120", "a batch run's wait for a worker"),
        Setting("BALANCE_DESK_SAMPLES", None, "the tests' third-party GRIB samples"),
        Setting("BALANCE_DESK_TEST_CHART_LOADS", "2", "page loads a case of a chart test"),
    )
}


def text(name: str, env: Mapping[str, str] | None = None) -> str | None:
    """The variable's value, stripped, or its default; None when neither gives one."""
    setting = SETTINGS[name]  # KeyError: a variable missing from the table
    value = (os.environ if env is None else env).get(name)
    value = value.strip() if value is not None else ""
    return value or setting.default


def whole_number(name: str, env: Mapping[str, str] | None = None, minimum: int = 1) -> int:
    """The variable as a whole number of at least ``minimum``."""
    value = text(name, env)
    try:
        number = int(value or "")
    except ValueError:
        number = minimum - 1
    if number < minimum:
        raise SettingError(f"{name} must be a whole number of {minimum} or more (it is {value!r})")
    return number


def seconds(name: str, env: Mapping[str, str] | None = None) -> float:
    """The variable as a positive number of seconds."""
    value = text(name, env)
    try:
        number = float(value or "")
    except ValueError:
        number = float("nan")
    if not number > 0 or number == float("inf"):
        raise SettingError(f"{name} must be a positive number of seconds (it is {value!r})")
    return number


def log_level(name: str = "BALANCE_DESK_LOG", env: Mapping[str, str] | None = None) -> int:
    """The variable as a logging level (DEBUG, INFO, WARNING, ERROR)."""
    value = (text(name, env) or "INFO").upper()
    level = logging.getLevelName(value)
    if not isinstance(level, int):
        raise SettingError(f"{name} must be DEBUG, INFO, WARNING or ERROR (it is {value!r})")
    return level
