"""A review room's page: the desk page with the room's bar above it and its notes below.

:class:`RoomBar` says who is in the room, who steers it and what you are doing
(following, steering, or looking on your own), with the buttons to change that and
your name. :class:`RoomNotes` lists the room's notes, shows the one chosen with its
versions, and takes new notes, edits and withdrawals. :class:`RoomSession` ties one
browser's :class:`~app.desk.page.Page` to the room's :class:`~app.rooms.hub.Hub`: the
person steering sends their view to the room, the others take it, and everything
the room says arrives on the page's own document (``Page._later``).

Names, titles and notes are text a person typed: they reach the page only through
``esc`` in HTML panes or as widget values, never as markup.
"""

from __future__ import annotations

import io
import logging
import uuid
from functools import partial

import panel as pn

from .. import compute
from ..rooms import RoomError
from ..rooms.hub import clean_name
from ..rooms.share import describe_view, notes_json, notes_markdown, room_link, stamp
from ..rooms.store import MAX_NAME, MAX_NOTE, MAX_TITLE
from ..state import URL_PARAMS, encode_query, parse_query
from .look import BLUE, INK, MUTED, WIDGET_CSS, alert, esc

__all__ = [
    "RoomBar",
    "RoomNotes",
    "RoomSession",
    "NAME_COOKIE",
    "no_such_room",
    "RoomOpener",
    "room_link",
]

log = logging.getLogger(__name__)

#: a row that wraps and says its own minimum width
WRAP = {"flex-wrap": "wrap", "min-width": "0"}

#: the browser remembers a person's name in this cookie (a year, this server only)
NAME_COOKIE = "bd_name"
#: a browser's own secret (HttpOnly, SameSite=Strict, set by app.serve on a page request)
#: and the request header through which the server hands the page a digest of it: the
#: notes a browser writes are changed by that browser only
WRITER_COOKIE = "bd_writer"
WRITER_HEADER = "X-Balance-Desk-Writer"
#: run in the browser when a name is chosen: remember it
REMEMBER_NAME_JS = (
    f"const v = (name.value_input || name.value || '').trim().slice(0, {MAX_NAME});"
    f"if (v) {{ document.cookie = '{NAME_COOKIE}=' + encodeURIComponent(v) + "
    "'; path=/; max-age=31536000; SameSite=Strict'; }"
)


def no_such_room():
    """The page of a wrong or expired room link: it says nothing more."""
    return pn.pane.HTML(
        f"<div style='color:{INK};font-size:18px'><h1>No such room</h1>"
        "<p>This link does not lead to a review room on this server.</p></div>"
    )


class RoomBar(pn.viewable.Viewer):
    """Above the page: the room, its people, and what you are doing in it."""

    #: where the room is (its view), said to those looking on their own
    where: dict | None = None

    def __init__(self, title: str, name: str, named: bool, **params):
        super().__init__(**params)
        #: the last hub snapshot shown and whose page it is
        self._last: tuple[dict, str] | None = None
        #: who took the steering from this page (said while they steer and it follows)
        self._taken_by: str | None = None
        css = [WIDGET_CSS]
        self.title = pn.pane.HTML(
            f"<div style='font-size:20px;font-weight:700;color:{INK}'>Review room: "
            f"<span class='bd-room-title'>{esc(title)}</span></div>",
            sizing_mode="stretch_width",
        )
        self.people = pn.pane.HTML("", sizing_mode="stretch_width")
        self.status = pn.pane.HTML("", sizing_mode="stretch_width")
        self.w_steer = pn.widgets.Button(
            label="Steer the room", button_type="primary", width=170, stylesheets=css
        )
        self.w_alone = pn.widgets.Button(label="Look on my own", width=170, stylesheets=css)
        self.w_back = pn.widgets.Button(
            label="Back to the room's view", width=200, stylesheets=css, visible=False
        )
        self.w_name = pn.widgets.TextInput(
            label="Your name, as the room sees it",
            value=name if named else "",
            max_length=MAX_NAME,
            placeholder="type your name",
            width=230,
            stylesheets=css,
        )
        self.w_use_name = pn.widgets.Button(
            label="Use this name", width=140, stylesheets=css, align="end"
        )
        self.w_use_name.js_on_click(args={"name": self.w_name}, code=REMEMBER_NAME_JS)
        self.alert = pn.pane.HTML("", sizing_mode="stretch_width")
        self.layout = pn.Column(
            self.title,
            self.people,
            pn.Row(
                self.status,
                self.w_steer,
                self.w_alone,
                self.w_back,
                self.w_name,
                self.w_use_name,
                sizing_mode="stretch_width",
                styles={**WRAP, "align-items": "flex-end", "gap": "6px"},
            ),
            self.alert,
            sizing_mode="stretch_width",
            styles={
                "background": "#eef3f9",
                "border-left": f"6px solid {BLUE}",
                "padding": "6px 12px",
                "min-width": "520px",
            },
        )

    def show(self, snap, me: str, fresh: bool = True):
        """Draw the room's people and your part in it from a hub snapshot (``fresh``: just
        sent, so its view is where the room is now)."""
        before = self._last[0] if self._last else None
        self._last = (snap, me)
        if fresh and snap.get("view"):
            self.where = dict(snap["view"])
        people = snap["people"]
        steering = next((p for p in people if p["steering"]), None)

        def who(p):
            you = " (you)" if p["key"] == me else ""
            return f"<b>{esc(p['name'])}</b>{you}" if p["steering"] else esc(p["name"]) + you

        following = [who(p) for p in people if p["following"] and not p["steering"]]
        alone = [who(p) for p in people if not p["following"]]
        parts = [f"Steering: {who(steering) if steering else 'nobody'}"]
        if following:
            parts.append("following: " + ", ".join(following))
        if alone:
            parts.append("on their own: " + ", ".join(alone))
        self.people.object = (
            f"<div class='bd-room-people' style='font-size:16px;color:{INK}'>"
            f"{len(people)} in the room &middot; " + " &middot; ".join(parts) + "</div>"
        )
        mine = next((p for p in people if p["key"] == me), None)
        if mine is None or not mine["following"] or mine["steering"]:
            self._taken_by = None  # said until this page steers or looks on its own
        if mine is None:
            text = "You are not in the room."
        elif mine["steering"]:
            text = "You steer the room: everyone following sees what you see."
        elif mine["following"]:
            text = f"You follow {esc(steering['name'])}." if steering else "You follow the room."
            if steering and _steered(before, me):
                # the one who steered is told that someone else took over, and by whom, for
                # as long as that one steers and they follow
                self._taken_by = steering["key"]
            if steering and steering["key"] == self._taken_by:
                text = f"{esc(steering['name'])} took over the steering from you. " + text
        else:
            text = "You are looking on your own: the room's changes do not reach you."
            if self.where:
                text += f" The room is at {esc(describe_view(self.where))}."
        self.status.object = (
            f"<div class='bd-room-status' style='font-size:16px;"
            f"font-weight:600;color:{INK};min-width:260px'>{text}</div>"
        )
        self.w_steer.visible = mine is not None and not mine["steering"]
        self.w_alone.visible = mine is not None and mine["following"]
        self.w_back.visible = mine is not None and not mine["following"]

    def closed(self, why: str):
        """The room has closed (its link expired): say why; nothing to steer or name."""
        self.status.object = alert(why)
        for w in (self.w_steer, self.w_alone, self.w_back, self.w_name, self.w_use_name):
            w.visible = False

    def show_where(self, view: dict):
        """The room has moved on while you look on your own: say where it is now."""
        self.where = dict(view)
        if self._last is not None:
            self.show(*self._last, fresh=False)

    def __panel__(self):
        return self.layout


class RoomNotes(pn.viewable.Viewer):
    """Below the chart: the room's notes, the chosen one, and a new note."""

    def __init__(self, **params):
        super().__init__(**params)
        css = [WIDGET_CSS]
        self.w_list = pn.widgets.Select(
            label="Notes (choose one to read it)", options={}, size=7, width=360, stylesheets=css
        )
        self.detail = pn.pane.HTML("", sizing_mode="stretch_width")
        self.w_show = pn.widgets.Button(
            label="Show it to the room",
            width=170,
            button_type="primary",
            stylesheets=css,
            disabled=True,
        )
        self.w_edit = pn.widgets.Button(label="Edit", width=90, stylesheets=css, disabled=True)
        self.w_withdraw = pn.widgets.Button(
            label="Withdraw", width=110, stylesheets=css, disabled=True
        )
        self.w_text = pn.widgets.TextAreaInput(
            label="New note",
            max_length=MAX_NOTE,
            placeholder="What do you see here? (the level, time and region go with it)",
            height=90,
            sizing_mode="stretch_width",
            stylesheets=css,
        )
        self.w_pin = pn.widgets.Toggle(
            label="Pin it to a point: click the chart", width=280, stylesheets=css
        )
        self.pin_text = pn.pane.HTML("", sizing_mode="stretch_width")
        self.w_add = pn.widgets.Button(
            label="Add the note", button_type="primary", width=160, stylesheets=css
        )
        self.w_cancel = pn.widgets.Button(
            label="Cancel the edit", width=150, stylesheets=css, visible=False
        )
        self.w_briefing = pn.widgets.Checkbox(
            label="Room notes in the briefing image", value=True, stylesheets=css
        )
        self.w_md = pn.widgets.FileDownload(
            label="Notes (Markdown)",
            filename="room-notes.md",
            callback=None,
            width=180,
            stylesheets=css,
        )
        self.w_json = pn.widgets.FileDownload(
            label="Notes (JSON)",
            filename="room-notes.json",
            callback=None,
            width=160,
            stylesheets=css,
        )
        self.alert = pn.pane.HTML("", sizing_mode="stretch_width")
        self.layout = pn.Column(
            pn.pane.HTML(
                f"<h3 style='margin:4px 0;color:{INK}'>Room notes</h3>"
                f"<div style='font-size:15px;color:{MUTED}'>Each note keeps the view it "
                "was written on; every version is kept.</div>",
                sizing_mode="stretch_width",
            ),
            # rows that wrap, each stating its own minimum width (Panel would sum its parts')
            pn.Row(
                pn.Column(
                    self.w_list,
                    pn.Row(self.w_show, self.w_edit, self.w_withdraw, styles=WRAP),
                    width=380,
                ),
                pn.Column(self.detail, sizing_mode="stretch_width", styles=WRAP),
                sizing_mode="stretch_width",
                styles=WRAP,
            ),
            self.w_text,
            pn.Row(self.w_pin, self.w_add, self.w_cancel, styles=WRAP),
            self.pin_text,
            self.alert,
            pn.Row(self.w_briefing, self.w_md, self.w_json, styles=WRAP),
            sizing_mode="stretch_width",
            styles={"border-top": f"3px solid {BLUE}", "padding": "6px 4px", "min-width": "380px"},
        )

    def show_list(self, notes, chosen=None):
        """``notes``: the latest version of each, oldest first."""
        options = {}
        for i, n in enumerate(notes, 1):
            head = " ".join(n.text.split())
            head = head if len(head) <= 48 else head[:47] + "\u2026"
            mark = " [withdrawn]" if n.withdrawn else ""
            options[f"#{i} {n.first_author}{mark}: {head}"] = n.note_id
        self.w_list.options = options
        if chosen in options.values():
            self.w_list.value = chosen

    def closed(self, why: str):
        """The room has closed: its notes stay readable and exportable, no more are written."""
        self.alert.object = alert(why)
        for w in (self.w_show, self.w_edit, self.w_withdraw, self.w_text, self.w_pin, self.w_add):
            w.visible = False
        self.w_cancel.visible = False

    def show_detail(self, number, note, history, mine: bool = False):
        """The chosen note; ``mine``: this browser wrote it, so it may edit or withdraw it."""
        if note is None:
            self.detail.object = f"<div style='font-size:15px;color:{MUTED}'>No note chosen.</div>"
            for w in (self.w_show, self.w_edit, self.w_withdraw):
                w.disabled = True
            return

        def what(v):
            return "withdrawn" if v.withdrawn else ("written" if v.version == 1 else "edited")

        versions = "".join(
            f"<li>{v.version}: {what(v)} "
            f"by {esc(v.author)}, {esc(stamp(v.created))}"
            + ("" if v.withdrawn or v.version == 1 else f": <i>{esc(v.text)}</i>")
            + "</li>"
            for v in history
        )
        edited = (
            f"; edited by {esc(note.author)}, {esc(stamp(note.created))}"
            if note.version > 1 and not note.withdrawn
            else ""
        )
        if not mine:
            edited += (
                f"<div style='font-size:15px;color:{MUTED}'>Only its author can edit or "
                "withdraw it.</div>"
            )
        state = (
            (
                " <span style='background:#5c4400;color:#fff;padding:1px 6px;border-radius:3px'>"
                "withdrawn</span>"
            )
            if note.withdrawn
            else ""
        )
        self.detail.object = (
            f"<div class='bd-note' style='font-size:16px;color:{INK}'>"
            f"<div><b>#{number}</b> by {esc(note.first_author)}, "
            f"{esc(stamp(note.first_created))}{state}{edited}</div>"
            f"<div style='white-space:pre-wrap;margin:6px 0;padding:6px 8px;background:#f6f6f6;"
            f"border-left:4px solid {BLUE}' class='bd-note-text'>{esc(note.text)}</div>"
            f"<div style='font-size:15px;color:{MUTED}'>View: "
            f"{esc(describe_view(note.view, note.point))}</div>"
            f"<details style='font-size:15px;margin-top:4px'><summary>Versions ({len(history)})"
            f"</summary><ul style='margin:4px 0'>{versions}</ul></details></div>"
        )
        self.w_show.disabled = False
        self.w_edit.disabled = self.w_withdraw.disabled = note.withdrawn or not mine

    def __panel__(self):
        return self.layout


class RoomSession:
    """One browser's page in a room: what it sends to the hub and what it takes from it."""

    def __init__(self, hub, token: str, page, name: str | None, writer: str = ""):
        self.hub, self.token, self.page = hub, token, page
        self.key = uuid.uuid4().hex
        self.writer = writer or self.key  # who may change this page's notes (its browser)
        room = hub.room(token)
        self.title = room.title if room is not None else ""
        cleaned = clean_name(name) if name else ""
        self.name = cleaned or f"guest {self.key[:4]}"
        self.joined = False
        self.snap = None
        self._applying = False
        self._notes: dict = {}  # note_id -> latest Note, in the order they came
        self._editing = None
        self._pin = None
        self.bar = RoomBar(self.title, self.name, bool(cleaned))
        self.notes = RoomNotes()
        page.sync_link = False
        page.top.objects = [self.bar]
        page.middle.objects = [self.notes]
        page.after_chart.append(self._mark_notes)
        b, n = self.bar, self.notes
        b.w_steer.on_click(lambda e: self._guard(self.steer))
        b.w_alone.on_click(lambda e: self._guard(self.step_out))
        b.w_back.on_click(lambda e: self._guard(self.step_in))
        b.w_use_name.on_click(
            lambda e: self._guard(self.rename, b.w_name.value_input or b.w_name.value)
        )
        n.w_list.param.watch(lambda e: self._show_chosen(), "value")
        n.w_show.on_click(lambda e: self._guard(self.show_note, n.w_list.value))
        n.w_edit.on_click(lambda e: self._start_edit())
        n.w_cancel.on_click(lambda e: self._stop_edit())
        n.w_withdraw.on_click(lambda e: self._guard(self.withdraw, n.w_list.value))
        n.w_add.on_click(lambda e: self._guard(self.write, n.w_text.value_input or n.w_text.value))
        n.w_pin.param.watch(self._pin_mode, "value")
        n.w_briefing.param.watch(lambda e: self._briefing(), "value")
        n.w_md.callback = lambda: io.StringIO(self._export("md"))
        n.w_json.callback = lambda: io.StringIO(self._export("json"))
        self._watcher = page.state.param.watch(self._local, list(URL_PARAMS))
        if room is not None:
            for note in hub.notes(token):
                self._notes[note.note_id] = note
            self._redraw_notes()

    # -- joining and leaving ------------------------------------------------------------
    def join(self):
        """Come into the room (when the browser is there): take the room's view, or give
        the room this page's view when nobody steers it yet."""
        try:
            snap = self.hub.join(self.token, self.key, self.name, self._notify, self.writer)
        except RoomError as exc:  # full, or its link has expired: nothing here to steer or write
            said = str(exc)
            said = said if said.endswith(".") else f"Could not join the room: {said}."
            self.bar.closed(said)
            self.notes.closed(said)
            return
        self.joined = True
        if snap["steering"] == self.key:
            self.hub.change_view(self.token, self.key, self._view())
        elif snap["view"]:
            self._apply(snap["view"])
        self._people(self.hub.snapshot(self.token))

    def leave(self, why: str = "its session ended"):
        """Out of the room (if it steered, the longest follower takes over)."""
        if self.joined:
            self.joined = False
            self.hub.leave(self.token, self.key)
            log.info("a page left its review room (%s)", why)

    # -- from the hub ---------------------------------------------------------------------
    def _notify(self, kind, payload):
        self.page._later(partial(self._from_room, kind, payload))

    def _from_room(self, kind, payload):
        if not self.joined:
            return
        if kind == "people":
            self._people(payload)
        elif kind == "where":
            self.page.room_view_seen()
            self.bar.show_where(payload["view"])
        elif kind == "view":
            self.page.room_view_seen()
            mine = next(
                (p for p in (self.snap or {}).get("people", []) if p["key"] == self.key), None
            )
            if mine is None or mine["following"]:
                self._apply(payload["view"])
        elif kind == "notes":
            note = payload["note"]
            self._notes[note.note_id] = note
            self._redraw_soon()
        elif kind == "closed":
            self.joined = False
            self.bar.closed(payload["why"])
            self.notes.closed(payload["why"])

    #: seconds a page waits before it redraws its notes, so that a burst of notes (a busy
    #: room) is one redraw per page, not one per note
    REDRAW_AFTER = 0.3

    def _redraw_soon(self):
        doc = self.page.doc
        if doc is None or doc.session_context is None:
            self._redraw_notes()
            return
        if getattr(self, "_redraw_pending", False):
            return
        self._redraw_pending = True

        def now():
            self._redraw_pending = False
            with pn.io.hold(doc):
                self._redraw_notes()

        doc.add_timeout_callback(now, int(self.REDRAW_AFTER * 1000))

    def _people(self, snap):
        self.snap = snap
        self.bar.show(snap, self.key)

    def _apply(self, view):
        values, _problems = parse_query(view, cases=self.page.library.names)
        self._applying = True
        try:
            self.page.state.param.update(**values)
        finally:
            self._applying = False

    # -- from this page -----------------------------------------------------------------
    def _view(self) -> dict:
        return encode_query(self.page.state.values())

    def _me(self):
        return next((p for p in (self.snap or {}).get("people", []) if p["key"] == self.key), None)

    def _local(self, *events):
        """A change of this page's view: the room's if this page steers; a follower who
        changes something looks on their own from then on."""
        if self._applying or not self.joined:
            return
        me = self._me()
        if me is None:
            return
        if me["steering"]:
            self._send_view_when_ready()
        elif me["following"] and not self.page.correcting:
            self.hub.step_out(self.token, self.key)

    def _send_view_when_ready(self):
        """Give the room this page's view once its region's report and its chart are
        computed (they are shared: every follower then shows them at once, in one message,
        with no work of its own; given at once, 19 followers each queued the view's work,
        marked their parts busy and took it in turn). It is a job of the page's own kind
        "room" (Page._submit): it waits in the page's lane behind the page's two views, a
        newer view replaces it, so the room gets only the latest, and the view is given on
        the page's own document (without a server, at once)."""
        view, page = self._view(), self.page
        snap = page.state.copy()

        def compute_views():
            for make in (
                lambda: compute.shared_box_data(page.library, snap, page.thresholds),
                lambda: compute.shared_chart_data(page.library, snap),
            ):
                try:
                    make()
                except Exception:  # noqa: BLE001 - each follower's page says it itself
                    pass
            return view

        page._submit("room", compute_views, self._give_view)

    def _give_view(self, view):
        if self.joined:
            try:  # (a page that no longer steers changes nothing: the hub says False)
                self.hub.change_view(self.token, self.key, view)
            except RoomError:  # the room is gone
                pass

    def _guard(self, fn, *args):
        self.bar.alert.object = ""
        self.notes.alert.object = ""
        try:
            fn(*args)
        except RoomError as exc:
            target = self.notes if fn in (self.write, self.withdraw, self.show_note) else self.bar
            target.alert.object = alert(str(exc))

    def steer(self):
        self.hub.steer(self.token, self.key, self._view())

    def step_out(self):
        self.hub.step_out(self.token, self.key)

    def step_in(self):
        self._apply(self.hub.step_in(self.token, self.key))

    def rename(self, name):
        self.hub.rename(self.token, self.key, name)
        self.name = clean_name(name)

    def show_note(self, note_id):
        """The note's view, for the whole room (whoever asks steers from then on)."""
        note = self._notes.get(note_id)
        if note is None:
            return
        self.hub.steer(self.token, self.key, note.view)
        self._apply(note.view)

    def write(self, text):
        text = (text or "").strip()
        if not text:
            raise RoomError("the note is empty")
        if self._editing is not None:
            self.hub.edit_note(self.token, self.key, self._editing, text)
            self._stop_edit()
        else:
            self.hub.add_note(
                self.token, self.key, text, self._view(), self._pin, request=uuid.uuid4().hex
            )
            self.notes.w_pin.value = False
            self._pin = None
            self.notes.pin_text.object = ""
        self.notes.w_text.value = ""

    def withdraw(self, note_id):
        if note_id in self._notes:
            self.hub.withdraw_note(self.token, self.key, note_id)

    def _start_edit(self):
        note = self._notes.get(self.notes.w_list.value)
        if note is None or note.withdrawn or note.writer != self.writer:
            return  # (the store refuses another's note too)
        self._editing = note.note_id
        self.notes.w_text.value = note.text
        self.notes.w_text.label = f"Edit note #{self._number(note.note_id)}"
        self.notes.w_add.label = "Save the edit"
        self.notes.w_cancel.visible = True

    def _stop_edit(self):
        self._editing = None
        self.notes.w_text.label = "New note"
        self.notes.w_add.label = "Add the note"
        self.notes.w_cancel.visible = False
        self.notes.w_text.value = ""

    def _pin_mode(self, event):
        self.page.chart.tap_listener = self._picked if event.new else None
        if event.new:
            self.notes.pin_text.object = alert("Click the chart where the note belongs.", "info")
        elif self._pin is None:
            self.notes.pin_text.object = ""

    def _picked(self, lon, lat):
        from .. import wording

        self._pin = (lon, lat)
        self.notes.pin_text.object = alert(
            f"The note will be pinned at {wording.lat(lat)} {wording.lon(lon)}.", "info"
        )

    # -- drawing the notes ----------------------------------------------------------------
    def _number(self, note_id) -> int:
        return list(self._notes).index(note_id) + 1

    def _redraw_notes(self):
        notes = list(self._notes.values())
        self.notes.show_list(notes, chosen=self.notes.w_list.value)
        self._show_chosen()
        self._mark_notes()
        self._briefing()

    def _show_chosen(self):
        note = self._notes.get(self.notes.w_list.value)
        if note is None:
            self.notes.show_detail(None, None, [])
            return
        self.notes.show_detail(
            self._number(note.note_id),
            note,
            self.hub.history(self.token, note.note_id),
            mine=note.writer == self.writer,
        )

    def _shown_here(self):
        case = self.page.state.case
        return [
            (i, n)
            for i, n in enumerate(self._notes.values(), 1)
            if not n.withdrawn and n.view.get("case") == case
        ]

    def _mark_notes(self):
        self.page.chart.show_notes(
            [
                (n.point[0], n.point[1], f"#{i}")
                for i, n in self._shown_here()
                if n.point is not None
            ]
        )

    def _briefing(self):
        on = self.notes.w_briefing.value
        self.page.briefing_notes = (
            [
                (f"#{i}", n.point, f"{n.first_author}: {' '.join(n.text.split())}")
                for i, n in self._shown_here()
            ]
            if on
            else []
        )

    def _export(self, kind):
        room = self.hub.room(self.token)
        if room is None:
            return "no such room\n"
        return (
            notes_markdown(room, self.hub.store)
            if kind == "md"
            else notes_json(room, self.hub.store)
        )


class RoomOpener(pn.viewable.Viewer):
    """On the desk page: open a review room on the view shown, and give its link."""

    def __init__(self, hub, page, width=250, **params):
        super().__init__(**params)
        css = [WIDGET_CSS]
        self.hub, self.page = hub, page
        self.w_title = pn.widgets.TextInput(
            label="Review with others: a title",
            max_length=MAX_TITLE,
            width=width,
            placeholder="e.g. Tuesday 12 UTC briefing",
            stylesheets=css,
        )
        self.w_open = pn.widgets.Button(label="Open a review room", width=width, stylesheets=css)
        self.out = pn.pane.HTML("", width=width)
        self.w_open.on_click(lambda e: self.open())
        self.layout = pn.Column(self.w_title, self.w_open, self.out, margin=0)

    def open(self):
        title = (self.w_title.value_input or self.w_title.value or "").strip()
        if not title:
            self.out.object = alert("Give the room a title first.")
            return
        try:
            room = self.hub.create(
                title, self.page.state.case, encode_query(self.page.state.values())
            )
        except Exception as exc:  # noqa: BLE001 - a store error is one sentence
            self.out.object = alert(f"The room could not be opened: {exc}", "error")
            return
        base = ""
        loc = pn.state.location
        if loc is not None and loc.hostname:
            base = f"{loc.protocol}//{loc.hostname}" + (f":{loc.port}" if loc.port else "")
        link = room_link(base or "", room.token)
        self.out.object = (
            f"<div style='font-size:15px;color:{INK}'>The room is open. Give "
            f"this link to the team (it is the room's key):<br>"
            f"<a class='bd-room-link' href='{esc(link)}' target='_blank' "
            f"rel='noopener noreferrer' style='word-break:break-all'>"
            f"{esc(link)}</a></div>"
        )

    def __panel__(self):
        return self.layout


def _steered(snap, key: str) -> bool:
    """Whether the person ``key`` steered the room in the hub snapshot ``snap``."""
    people = (snap or {}).get("people", [])
    return any(p["key"] == key and p["steering"] for p in people)
