"""A room's notes with their views, as Markdown (for a briefing) or JSON (for a program).

Both list every note with every version (edits and withdrawals included): who
wrote each, when, and the view it was written on. The room's token is not in
either: it is the room's key, and an export is passed around. Text a person
typed is written as typed in JSON (a string, escaped by JSON); in Markdown it goes
through :func:`app.outside.markdown`, so no heading, link, image or HTML comes
out of a note, a name or a title.
"""

from __future__ import annotations

import datetime as dt
import json

from .. import wording
from ..outside import markdown
from ..state import parse_region

__all__ = ["notes_markdown", "notes_json", "describe_view", "stamp"]


def room_link(base: str, token: str) -> str:
    """The address of a room: ``BASE/room?room=TOKEN`` (the rooms commands make it without
    the page)."""
    import urllib.parse

    return f"{base.rstrip('/')}/room?{urllib.parse.urlencode({'room': token})}"


def stamp(t: float) -> str:
    """A time of the room (seconds since the epoch) in the page's time format."""
    d = dt.datetime.fromtimestamp(float(t), tz=dt.UTC)
    return d.strftime("%a %d %b %Y %H:%M UTC")


def _is_zero(level) -> bool:
    try:
        return float(level) == 0.0  # the view state's sea level
    except (TypeError, ValueError):
        return False


def describe_view(view: dict, point=None) -> str:
    """One line: case, level, valid time, region (and the point)."""
    parts = [str(view.get("case") or "?")]
    if view.get("level") is not None and view.get("level") != "":
        level = view["level"]
        parts.append(
            "sea level"
            if str(level).strip().lower() == "msl" or _is_zero(level)
            else f"{level} hPa"
        )
    if view.get("time"):
        parts.append(wording.when(view["time"], None))
    spec, _ = parse_region(view.get("region", ""))
    parts.append("whole case" if spec is None else spec.describe())
    if point is not None:
        parts.append(f"point {wording.lat(point[1])} {wording.lon(point[0])}")
    return " · ".join(parts)


def _versions(store, token, note):
    return store.history(token, note.note_id)


def notes_json(room, store) -> str:
    notes = []
    for i, n in enumerate(store.notes(room.token), 1):
        notes.append(
            {
                "number": i,
                "note_id": n.note_id,
                "withdrawn": n.withdrawn,
                "text": n.text,
                "view": n.view,
                "view_text": describe_view(n.view, n.point),
                "point": list(n.point) if n.point else None,
                "versions": [
                    {
                        "version": v.version,
                        "author": v.author,
                        "time": v.created,
                        "time_text": stamp(v.created),
                        "text": v.text,
                        "withdrawn": v.withdrawn,
                    }
                    for v in _versions(store, room.token, n)
                ],
            }
        )
    out = {
        "room": {
            "title": room.title,
            "case": room.case,
            "created": room.created,
            "created_text": stamp(room.created),
        },
        "notes": notes,
        "caution": "balance-desk is a diagnostic aid. Official forecasts and warnings come "
        "from the responsible meteorological service; local rules and licensed "
        "practice come first.",
    }
    return json.dumps(out, indent=2, ensure_ascii=False)


def notes_markdown(room, store) -> str:
    def e(text):
        return markdown(text, inline=True)

    notes = store.notes(room.token)
    withdrawn = sum(n.withdrawn for n in notes)
    lines = [
        f"# Review room: {e(room.title)}",
        "",
        f"Case {e(room.case)} · opened {stamp(room.created)} · {len(notes)} notes"
        + (f" ({withdrawn} withdrawn)" if withdrawn else ""),
        "",
        "*balance-desk is a diagnostic aid. Official forecasts and warnings come from the "
        "responsible meteorological service; local rules and licensed practice come "
        "first.*",
        "",
    ]
    for i, n in enumerate(notes, 1):
        state = " (withdrawn)" if n.withdrawn else ""
        lines += [
            f"## Note {i}{state}: {e(n.first_author)}, {stamp(n.first_created)}",
            "",
            f"View: {e(describe_view(n.view, n.point))}",
            "",
        ]
        lines += ["> " + line for line in markdown(n.text).split("\n")] + [""]
        hist = _versions(store, room.token, n)
        if len(hist) > 1:
            lines.append("Versions:")
            for v in hist:
                what = "withdrawn" if v.withdrawn else ("written" if v.version == 1 else "edited")
                lines.append(
                    f"- {v.version}: {what} by {e(v.author)}, {stamp(v.created)}"
                    + ("" if v.withdrawn else f": {e(' '.join(v.text.split()))}")
                )
            lines.append("")
    return "\n".join(lines)
