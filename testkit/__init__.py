"""What the tests and the benchmarks share: servers, Chromium, the websocket page, data.

* :mod:`testkit.serving` -- a real ``balance-desk serve`` on a port the system picks, and
  :func:`~testkit.serving.wait_until`, the one way to wait (on a condition, never a clock);
* :mod:`testkit.chromium` -- headless Chromium through Playwright;
* :mod:`testkit.wire_page` -- a page session driven over the websocket, without a browser;
* :mod:`testkit.makedata`, :mod:`testkit.gribwrite` -- files the tests make themselves;
* :mod:`testkit.independent_balance`, :mod:`testkit.independent_systems` -- truths computed
  without the code under test.

Not installed with the package: the tests and ``bench/`` import it from the checkout.
"""
