"""Outside text stays text in every output that is not the page (the page: test_security).

A corpus of hostile text (control and escape sequences, right-to-left and zero-width
characters, dollar signs and LaTeX, spreadsheet formula prefixes, Markdown headings, lists,
links and images, HTML, entities, very long text) goes in through what people type (notes,
names, room titles) and what files carry (their names); every output is checked by
something that is not our code: the terminal output byte by byte, CSV read back with the
standard library's csv module, Markdown rendered by markdown-it-py (a CommonMark
implementation that Panel depends on), the PNG opened by Pillow.
"""

import csv
import io
import os
import unicodedata

import numpy as np
import pytest

from app import outside
from app.rooms.share import notes_markdown
from app.rooms.store import SQLiteStore
from testkit.makedata import latlon_dataset
from testkit.payloads import PAYLOADS

ROOT = os.path.join(os.path.dirname(os.path.abspath(__file__)), "..")

#: text that would act in a terminal, a spreadsheet, a Markdown viewer or matplotlib
HOSTILE = PAYLOADS + [
    "\x1b[2J\x1b[31mred\x1b[0m",  # clear the screen, colour
    "\x1b]0;title\x07",  # set the terminal's title (OSC)
    "\x1b]8;;http://evil.invalid\x1b\\link\x1b]8;;\x1b\\",  # a terminal hyperlink
    "over\rwrite",
    "back\x08\x08space",
    "\x9b31m C1 control",
    "\u202egnp.exe",
    "zero\u200bwidth\u2028line\u2029para",
    "$\\left($",
    "$\\frac{a}{$",
    '=HYPERLINK("http://evil.invalid","click")',
    "@SUM(1+1)*cmd|' /C calc'!A0",
    "+cmd",
    "-2+3",
    "\t=1+1",
    "# heading\n## another\n- item\n1. numbered\n> quote\n---\n===",
    "[link](javascript:alert(1)) ![image](http://evil.invalid/x.png) <http://evil.invalid>",
    "see http://evil.invalid and www.evil.invalid",
    'it\'s "quoted" & <b>bold</b> &amp; &#x27;',
    "*emphasis* _under_ `code` ~~strike~~ | table |",
    "\u05e9\u05dc\u05d5\u05dd right-to-left",
    "x" * 5000,
]

_HIDDEN = {"Cc", "Cf", "Cs", "Co", "Cn", "Zl", "Zp"}


def _hidden(text, keep="\n"):
    """The characters of ``text`` a terminal would act on or hide (Unicode categories)."""
    return [c for c in text if unicodedata.category(c) in _HIDDEN and c not in keep]


@pytest.mark.parametrize("text", HOSTILE, ids=range(len(HOSTILE)))
def test_terminal_text_has_no_control_or_format_characters(text):
    out = outside.terminal(text)
    assert _hidden(out, keep="\n\t") == []
    assert _hidden(outside.one_line(text), keep="") == []
    # and it can still be read: a plain text comes through unchanged
    if not _hidden(text, keep="\n\t"):
        assert out == text


def test_terminal_text_says_what_it_spelled_out():
    assert outside.terminal("a\x1b[31mb") == "a\\x1b[31mb"
    assert outside.one_line("a\nb\u202ec") == "a\\x0ab\\u202ec"
    assert outside.terminal("a\nb\tc") == "a\nb\tc"


@pytest.mark.parametrize("text", HOSTILE, ids=range(len(HOSTILE)))
def test_no_csv_cell_starts_a_formula(text):
    buf = io.StringIO()
    outside.csv_writer(buf).writerow([text, "plain", 1.5, "-1.5e-04"])
    (row,) = list(csv.reader(io.StringIO(buf.getvalue())))
    # a spreadsheet runs a cell that starts with these (OWASP, CSV injection)
    assert not row[0].startswith(("=", "+", "-", "@", "\t", "\r")), row[0][:20]
    assert row[1:] == ["plain", "1.5", "-1.5e-04"]  # numbers stay numbers
    if text.startswith(("=", "+", "-", "@", "\t")):
        assert row[0].startswith("'")


def test_a_cell_that_is_only_text_is_not_changed():
    assert outside.csv_cell("ocean_cyclone") == "ocean_cyclone"
    assert outside.csv_cell("-3.5") == "-3.5" and outside.csv_cell(-3.5) == -3.5
    assert outside.csv_cell("-x") == "'-x"


def _rendered(md):
    from markdown_it import MarkdownIt

    # CommonMark with GitHub's tables, strikethrough and bare-address links
    return MarkdownIt("gfm-like").render(md)


@pytest.mark.parametrize("text", HOSTILE, ids=range(len(HOSTILE)))
def test_markdown_text_renders_as_one_paragraph_of_text(text):
    for inline in (True, False):
        html = _rendered(outside.markdown(text, inline=inline))
        for tag in ("<h1", "<h2", "<h3", "<ul", "<ol", "<li", "<blockquote", "<hr", "<a ",
                    "<img", "<em", "<strong", "<code", "<s>", "<del", "<table", "<script",
                    "<b>", "<svg", "<iframe"):  # fmt: skip
            assert tag not in html, (tag, html[:300])
        assert html.count("<p>") <= 1


def test_markdown_text_keeps_its_words():
    html = _rendered(outside.markdown('it\'s "quoted" & 3.5 m/s: fine'))
    assert "it's" in html or "it&#x27;s" not in outside.markdown("it's")
    assert "&#x27;" not in outside.markdown("it's")  # plain quotes, no entities written
    assert "3.5 m/s" in html


def test_the_rooms_markdown_export_gains_nothing_from_notes_names_and_titles(tmp_path):
    store = SQLiteStore(str(tmp_path / "rooms.sqlite"))
    title = "Brief\n# injected heading\n[x](javascript:alert(1)) \x1b[2J"
    room = store.create_room(title, "ocean_cyclone", {"case": "ocean_cyclone"})
    texts = [t[:1900] for t in HOSTILE[-14:]] + ["a plain note, it's fine"]
    for i, text in enumerate(texts):
        store.add_note(room.token, f"Name{i} # [n](javascript:1) \x1b[31m", text, {})
    md = notes_markdown(room, store)
    store.close()
    assert _hidden(md, keep="\n") == []
    assert "&#x27;" not in md and "it's fine" in md
    html = _rendered(md)
    # our own structure only: one title, one heading per note, no link, image or HTML
    assert html.count("<h1>") == 1 and html.count("<h2>") == len(texts)
    for tag in ("<a ", "<img", "<script", "<svg", "<iframe", "<b>", "<h3", "<h4", "<ul", "<ol"):
        assert tag not in html, tag


def _run(*args):
    """A command of app.cli in this process: its exit status, stdout and stderr (what it
    prints goes through the same stream as in a terminal)."""
    import contextlib

    from app.cli import main

    out, err = io.StringIO(), io.StringIO()
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
        code = main(list(args))
    return code, out.getvalue(), err.getvalue()


HOSTILE_FILE_NAMES = [
    "=HYPERLINK(1)\x1b[2J.nc",
    "@SUM(1)\u202e.nc",
    "+cmd $x^{2}$.nc",
]


@pytest.fixture(scope="module")
def hostile_files(tmp_path_factory):
    folder = tmp_path_factory.mktemp("hostile")
    ds, _ = latlon_dataset(np.arange(60.0, 39.9, -2.0), np.arange(-20.0, 20.1, 2.0))
    paths = []
    for name in HOSTILE_FILE_NAMES:
        path = os.path.join(folder, name)
        plain = os.path.join(folder, "plain.nc")  # netCDF-C will not write some of these names
        ds.to_netcdf(plain)
        os.rename(plain, path)
        paths.append(path)
    return str(folder), paths


@pytest.mark.parametrize("fmt", ["table", "csv", "json"])
def test_analyze_prints_a_hostile_file_name_as_text(hostile_files, fmt):
    _, paths = hostile_files
    for path in paths:
        code, out, err = _run("analyze", path, "--level", "500", "--format", fmt)
        assert code == 0, err
        # (CSV's own line ends are "\r\n")
        assert _hidden(out.replace("\r\n", "\n"), keep="\n") == [], repr(out[:300])
        if fmt == "csv":
            rows = list(csv.reader(io.StringIO(out)))
            assert rows[1][0].startswith("'"), rows[1][0]  # the case's name, not a formula
            for row in rows:
                for cell in row:
                    assert not cell.startswith(("=", "+", "@")), cell


def test_cases_and_rooms_list_print_hostile_text_as_text(hostile_files, tmp_path):
    folder, _ = hostile_files
    code, out, err = _run("cases", "--dir", folder)
    assert code == 0, err
    assert _hidden(out, keep="\n") == [] and "\\x1b" in out
    store = str(tmp_path / "rooms.sqlite")
    from app.cases import case_names, case_paths

    case = next(n for n in case_names(case_paths(None, folder)) if "\x1b" in n)
    code, out, err = _run(
        "rooms",
        "create",
        "Brief \x1b]0;owned\x07 \u202e",
        "--case",
        case,
        "--cases",
        folder,
        "--store",
        store,
    )
    assert code == 0, err
    assert _hidden(err, keep="\n") == []  # the case's name in the sentence, as text
    code, out, err = _run("rooms", "list", "--store", store)
    assert code == 0, err
    assert _hidden(out, keep="\n") == [] and "\\x1b" in out and "\\u202e" in out


def test_the_briefing_image_draws_dollar_signs_and_latex_as_text():
    from PIL import Image

    from app.briefing_image import briefing_png

    png = briefing_png(
        None,
        None,
        None,
        region_text="$\\left($ " + HOSTILE_FILE_NAMES[0],
        caution="c",
        invented_text="",
        notes=["$\\frac{a}{$"],
        room_notes=[("#1", None, text[:200]) for text in HOSTILE[-14:]],
    )
    image = Image.open(io.BytesIO(png))
    assert image.size[0] > 1000


def test_the_briefing_image_would_fail_if_text_were_read_as_mathematics(monkeypatch):
    """The check above can fail: with mathematics parsing on, one note breaks the image."""
    from app.briefing_image import briefing_png

    monkeypatch.setitem(outside.FIGURE_RC, "text.parse_math", True)
    with pytest.raises(ValueError):
        briefing_png(None, None, None, region_text="$\\left($", caution="c", invented_text="")
