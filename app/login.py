"""Slowed logins: wrong passphrases are held back per client address and in total, and logged.

Panel's own login page checks the passphrase (``panel.auth.BasicLoginHandler``); the
handler here runs the same check after a hold that :class:`LoginGate` decides. The numbers
are our own choices (common practice, no source):

* an address has :attr:`LoginGate.FREE` failed attempts (in :attr:`LoginGate.WINDOW_S`
  seconds) without a hold; after that each attempt waits 1, 2, 4 ... seconds, at most
  :attr:`LoginGate.MAX_HOLD_S`;
* one attempt at a time per address: attempts sent side by side are given slots one hold
  apart, so sending many at once gains nothing, and more than :attr:`LoginGate.PENDING`
  waiting attempts are refused outright (429);
* when more than :attr:`LoginGate.TOTAL_PER_MINUTE` attempts have failed in the last minute
  from all addresses together (many addresses, one guesser), every attempt waits at least
  :attr:`LoginGate.TOTAL_HOLD_S`.

The hold comes before the check, for right and wrong passphrases alike: the wait tells a
guesser nothing, and the right passphrase still gets in once its wait is over. A success
clears its address's failures. Failed attempts are logged with the address and the typed
user name (cut, printable), never the passphrase.
"""

from __future__ import annotations

import collections
import logging
import threading
import time

log = logging.getLogger(__name__)

__all__ = ["LoginGate", "install", "slowed_login_handler"]


class LoginGate:
    """When each login attempt may be checked (see the module docstring)."""

    FREE = 3
    WINDOW_S = 900.0
    MAX_HOLD_S = 30.0
    PENDING = 10
    TOTAL_PER_MINUTE = 60
    TOTAL_HOLD_S = 5.0
    ADDRESSES = 10_000  # addresses remembered (the oldest forgotten first)

    def __init__(self, clock=time.monotonic):
        self.clock = clock
        self._lock = threading.Lock()
        self._failures: collections.OrderedDict = collections.OrderedDict()
        self._next: dict = {}
        self._pending: collections.Counter = collections.Counter()
        self._all: collections.deque = collections.deque()

    def failures(self, address: str) -> int:
        """Failed attempts of ``address`` in the window."""
        with self._lock:
            return len(self._recent(address, self.clock()))

    def hold_after(self, failures: int) -> float:
        """The wait of an address's next attempt after ``failures`` failed ones (s)."""
        if failures < self.FREE:
            return 0.0
        return min(self.MAX_HOLD_S, 2.0 ** (failures - self.FREE))

    def admit(self, address: str) -> float | None:
        """Seconds this attempt waits before it is checked; None: too many are waiting."""
        with self._lock:
            now = self.clock()
            if self._pending[address] >= self.PENDING:
                return None
            hold = self.hold_after(len(self._recent(address, now)))
            while self._all and self._all[0] < now - 60.0:
                self._all.popleft()
            if len(self._all) > self.TOTAL_PER_MINUTE:
                hold = max(hold, self.TOTAL_HOLD_S)
            slot = max(now, self._next.get(address, now)) + hold
            self._next[address] = slot
            self._pending[address] += 1
            return slot - now

    def record(self, address: str, ok: bool) -> int:
        """The attempt's outcome; returns the address's failures in the window."""
        with self._lock:
            now = self.clock()
            self._pending[address] -= 1
            if self._pending[address] <= 0:  # none waiting: its last slot has passed
                del self._pending[address]
                self._next.pop(address, None)
            if ok:
                self._failures.pop(address, None)
                return 0
            times = self._recent(address, now)
            times.append(now)
            self._all.append(now)
            self._failures[address] = times
            self._failures.move_to_end(address)
            while len(self._failures) > self.ADDRESSES:
                old, _ = self._failures.popitem(last=False)
                self._next.pop(old, None)
            return len(times)

    def _recent(self, address, now) -> collections.deque:
        times = self._failures.get(address, collections.deque())
        while times and times[0] < now - self.WINDOW_S:
            times.popleft()
        return times


def slowed_login_handler(base, gate: LoginGate):
    """Panel's login handler class ``base`` with its checks held back by ``gate``."""
    import asyncio

    from .outside import one_line

    class SlowedLogin(base):
        def set_cookie(self, name, value, *args, **kwargs):
            # every cookie of the login page (the page to go back to, which may hold a
            # room's key; the signed user) kept from scripts and from other sites' requests
            kwargs.setdefault("httponly", True)
            kwargs.setdefault("samesite", "Lax")
            return super().set_cookie(name, value, *args, **kwargs)

        async def post(self):
            address = self.request.remote_ip or "unknown"
            wait = gate.admit(address)
            if wait is None:
                log.warning(
                    "login attempt from %s refused: %d already waiting", address, gate.PENDING
                )
                self.set_status(429)
                self.set_header("Retry-After", str(int(gate.MAX_HOLD_S)))
                self.finish("Too many login attempts at once: wait a minute and try again.")
                return
            if wait > 0:
                await asyncio.sleep(wait)
            user = self.get_argument("username", "")
            ok = self._validate(user, self.get_argument("password", ""))
            failed = gate.record(address, ok)
            if ok:
                log.info("login from %s as %s", address, one_line(user)[:40])
            else:
                log.warning(
                    "login refused from %s as %s (%d failed in %.0f min; the next attempt "
                    "waits %.0f s)",
                    address,
                    one_line(user)[:40],
                    failed,
                    gate.WINDOW_S / 60.0,
                    gate.hold_after(failed),
                )
            super().post()

    SlowedLogin.__name__ = SlowedLogin.__qualname__ = "SlowedLogin"
    return SlowedLogin


_panel_handler = None  # Panel's own login handler, before install() replaced it


def install(gate: LoginGate) -> None:
    """Panel's login page checks passphrases through ``gate`` from now on: its
    ``BasicAuthProvider`` routes the login page to ``panel.auth.BasicLoginHandler``,
    looked up when the server is made, so the slowed handler is put in that name."""
    import panel.auth

    global _panel_handler
    if _panel_handler is None:
        _panel_handler = panel.auth.BasicLoginHandler
    panel.auth.BasicLoginHandler = slowed_login_handler(_panel_handler, gate)
