"""The desk page, in parts: each module owns one part of the page.

    page.py      the page: its parts, the shared view state, the work that keeps them current
    controls.py  case, level, time, field, vectors, projection, units, smoothing, region
    chart.py     the filled field, contours, vectors, coastlines, no-data points, the region
    evidence.py  the verdict and why, the ranked terms, the balances, the numbers
    below.py     through the levels, through the times, the scale sheet, the notes
    downloads.py   the briefing PNG and the CSV and JSON of the region's report
    room.py      a review room: its bar (who steers, who follows), its notes
    look.py      colours, type, the caution, text made safe for HTML

Dependencies run one way: the command line and the server above :mod:`.page`, the
page above its parts, the parts above :mod:`app.compute`, :mod:`app.render` and
:mod:`app.library`.
"""

from .page import Page, error_page, make_room_session, make_session

__all__ = ["Page", "make_session", "make_room_session", "error_page"]
