"""Text that came from outside, made plain for each kind of output, in one place.

Outside text is whatever the project did not write itself: what people type in the browser
(notes, names, room titles, boxes), a file's name, its attributes and variable names, a
value taken from a link. It is shown as text everywhere, never as markup, a control
sequence or a formula:

* :func:`terminal` -- a terminal or a log: control characters (escape sequences, carriage
  returns, backspaces), invisible format characters (right-to-left overrides, zero-width
  spaces) and unpaired surrogates are spelled out as escapes; newlines and tabs stay, and
  a carriage return right before a newline (the line end CSV writes).
* :func:`one_line` -- the same, with newlines and tabs spelled out too (a title, a name).
* :func:`csv_cell` -- a spreadsheet cell: text that a spreadsheet would take for a formula
  (a first character ``=``, ``+``, ``-``, ``@``, a tab or a carriage return) gets a leading
  apostrophe, as spreadsheet users expect (the OWASP "CSV injection" advice; common
  practice). Numbers, and text that reads as a number, are left alone.
* :func:`markdown` -- a Markdown document: every character Markdown gives a meaning to is
  escaped with a backslash, so a note cannot add headings, lists, links, images or HTML;
  ``inline`` text (a title, a name) is also kept on one line.
* :func:`figure_text` -- matplotlib: the briefing image is drawn with mathematics parsing
  off (:data:`FIGURE_RC`), so dollar signs stay dollar signs; this only makes it one line.

The page itself writes outside text through :func:`app.desk.look.esc` (HTML escaping of
text made :func:`one_line` or :func:`terminal` first).
"""

from __future__ import annotations

import csv
import re
import unicodedata

__all__ = [
    "terminal",
    "one_line",
    "csv_cell",
    "csv_writer",
    "csv_frame",
    "markdown",
    "figure_text",
    "FIGURE_RC",
    "TerminalStream",
]

#: character classes spelled out: controls, format characters (bidi overrides, zero-width
#: joiners), surrogates, private use, unassigned; and the line and paragraph separators
_HIDDEN = {"Cc", "Cf", "Cs", "Co", "Cn", "Zl", "Zp"}


def _spelled(ch: str) -> str:
    code = ord(ch)
    if 0xDC80 <= code <= 0xDCFF:  # a byte that was not UTF-8 (surrogate escape)
        return f"\\x{code - 0xDC00:02x}"
    if code < 0x100:
        return f"\\x{code:02x}"
    return f"\\u{code:04x}" if code < 0x10000 else f"\\U{code:08x}"


def terminal(text, *, keep: str = "\n\t") -> str:
    """``text`` with every hidden character but those in ``keep`` spelled out (``\\x1b``,
    ``\\u202e``): nothing in it can move the cursor, recolour or reorder a terminal."""
    text = str(text)
    if text.isprintable() and not any(c in text for c in "\u2028\u2029"):
        return text
    out = []
    for i, ch in enumerate(text):
        crlf = ch == "\r" and "\n" in keep and text[i + 1 : i + 2] == "\n"  # a CSV line end
        hidden = unicodedata.category(ch) in _HIDDEN and ch not in keep and not crlf
        out.append(_spelled(ch) if hidden else ch)
    return "".join(out)


def one_line(text) -> str:
    """:func:`terminal` with newlines and tabs spelled out too: always one line."""
    return terminal(text, keep="")


_NUMBER = re.compile(r"[-+]?(\d+\.?\d*|\.\d+)([eE][-+]?\d+)?")
_FORMULA_START = ("=", "+", "-", "@", "\t", "\r")


def csv_cell(value):
    """A CSV cell that no spreadsheet runs: text starting with a formula character gets a
    leading apostrophe (numbers, and text that is a number such as ``-1.5e-04``, stay)."""
    if isinstance(value, str):
        value = one_line(value) if any(c in value for c in "\r\n") else value
        if value.startswith(_FORMULA_START) and not _NUMBER.fullmatch(value):
            return "'" + value
    return value


class _PlainWriter:
    """A csv.writer whose cells go through :func:`csv_cell`."""

    def __init__(self, buf, **kw):
        self._w = csv.writer(buf, **kw)

    def writerow(self, row):
        return self._w.writerow([csv_cell(v) for v in row])

    def writerows(self, rows):
        for row in rows:
            self.writerow(row)


def csv_writer(buf, **kw) -> _PlainWriter:
    """:func:`csv.writer` for outside text: every cell through :func:`csv_cell`."""
    return _PlainWriter(buf, **kw)


def csv_frame(df):
    """A pandas frame with the text cells of its object columns through :func:`csv_cell`
    and its column names too (before ``to_csv``)."""
    out = df.copy()
    for col in out.columns:
        if out[col].dtype == object or str(out[col].dtype).startswith("string"):
            out[col] = out[col].map(csv_cell)
    out.columns = [csv_cell(str(c)) for c in out.columns]
    return out


#: characters that start markup anywhere in a line (emphasis, code, links and images,
#: HTML and entities, tables, strikethrough, headings, escapes); CommonMark 0.31 section
#: 2.4: any ASCII punctuation may be escaped with a backslash
_MARKDOWN_INLINE = re.compile(r"([\\`*_{}\[\]<>#|~&!])")
#: what starts a block at the beginning of a line: a list item, a setext underline, a
#: numbered item ("1." or "1)")
_MARKDOWN_LINE_START = re.compile(r"^(\s*)([-+=]|\d+(?=[.)]))")


def markdown(text, *, inline: bool = False) -> str:
    """``text`` as literal Markdown: the characters that start markup are backslash-escaped
    (CommonMark allows it for any ASCII punctuation), so no heading, list, quote, link,
    image, emphasis, HTML or entity comes out of it; hidden characters are spelled out.
    ``inline``: newlines become spaces (a title, a name, a table cell). A multi-line text
    keeps its lines, each ending in a hard break."""
    text = _MARKDOWN_INLINE.sub(r"\\\1", terminal(text, keep="\n"))
    # bare addresses that GitHub-flavoured Markdown would make links of
    text = text.replace("://", ":\\/\\/").replace("www.", "www\\.")
    lines = []
    for line in text.split("\n"):
        line = line.strip()
        m = _MARKDOWN_LINE_START.match(line)
        if m and m.group(2)[0].isdigit():  # "1." -> "1\." keeps the number, not the list
            line = line[: m.end()] + "\\" + line[m.end() :]
        elif m:
            line = m.group(1) + "\\" + line[m.start(2) :]
        lines.append(line)
    if inline:
        return " ".join(line for line in lines if line)
    return "  \n".join(lines)


#: matplotlib settings under which the briefing image is drawn: no text is read as
#: mathematics (a note "$\left($" would otherwise make the export fail) or sent to TeX
FIGURE_RC = {"text.parse_math": False, "text.usetex": False}


def figure_text(text) -> str:
    """Outside text for a matplotlib label (drawn under :data:`FIGURE_RC`): one line."""
    return one_line(text)


class TerminalStream:
    """A text stream that writes through :func:`terminal` (the command line's stdout): no
    outside text printed by any command reaches the terminal as a control sequence."""

    def __init__(self, stream):
        self._stream = stream

    def write(self, text):
        return self._stream.write(terminal(text))

    def __getattr__(self, name):
        return getattr(self._stream, name)
