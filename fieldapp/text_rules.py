"""What text Toeline accepts, in one place: for marks, names and codes, for free text, and for
every cell it writes to a CSV file.

* Every text must be valid Unicode: a lone surrogate ("\\ud800", which JSON can carry) cannot be
  written as UTF-8, so a page, a PDF or an export showing it would fail.
* Marks, names and codes hold printable characters only (``str.isprintable``: no control
  characters such as NUL or U+0001, no format characters, no line breaks): they go into
  addresses, spreadsheet cells, XML of XLSX files and PDF tables, where such characters break
  the file or hide what is written.
* A pile mark may not hold "/": the mark is one part of every address of its pile
  (``/projects/1/rig/C1``), so "C1/3" would be read as two parts and the pile could never be
  recorded or signed. Refusing it is safer than quoting it through every address, link, the
  tablet's outbox and its cached pages.
* A code (an exposure class) or a mark may not begin like a spreadsheet formula (=, +, -, @,
  tab, CR), and every CSV cell Toeline writes that begins so gets a leading apostrophe
  (:func:`csv_cell`), so a spreadsheet shows it as text and never runs it.
"""

from __future__ import annotations

import re
import unicodedata

from fieldapp.queries.piles import FORMULA_STARTS

LINE_BREAKS = "\n\r\t"  # free text (notes, descriptions) may hold these


def _describe(ch: str) -> str:
    name = unicodedata.name(ch, "")
    kind = {"Cc": "a control character", "Cf": "a format character", "Cs": "half of a surrogate pair",
            "Co": "a private-use character", "Cn": "not a character", "Zl": "a line break",
            "Zp": "a paragraph break", "Zs": "a space other than the ordinary one"}.get(
        unicodedata.category(ch), "not printable")
    return f"U+{ord(ch):04X}" + (f" {name}" if name else "") + f" ({kind})"


def unicode_problem(label: str, value: str) -> str | None:
    """A message when ``value`` is not valid Unicode (a lone surrogate), else None."""
    for i, ch in enumerate(value, start=1):
        if "\ud800" <= ch <= "\udfff":
            return f"{label} is not valid Unicode text: character {i} is {_describe(ch)}"
    return None


def printable_problem(label: str, value: str) -> str | None:
    """A message when ``value`` holds a character that is not printable, else None."""
    for i, ch in enumerate(value, start=1):
        if not ch.isprintable():
            return f"{label} must hold printable characters only: character {i} is {_describe(ch)}"
    return None


def text_problem(label: str, value: str) -> str | None:
    """Free text (notes, descriptions, reasons): valid Unicode, and no control character other
    than line breaks and tabs. A message, or None."""
    problem = unicode_problem(label, value)
    if problem:
        return problem
    for i, ch in enumerate(value, start=1):
        if unicodedata.category(ch) == "Cc" and ch not in LINE_BREAKS:
            return f"{label} must not hold control characters: character {i} is {_describe(ch)}"
    return None


def formula_problem(label: str, value: str) -> str | None:
    """A message when ``value`` begins like a spreadsheet formula, else None."""
    if value and value.startswith(FORMULA_STARTS):
        shown = {"\t": "a tab", "\r": "a carriage return"}.get(value[0], repr(value[0]))
        return f"{label} must not start with {shown} (a spreadsheet would read it as a formula)"
    return None


def name_problem(label: str, value: str) -> str | None:
    """Names (ground models, caps, projects, sites): valid Unicode and printable."""
    return unicode_problem(label, value) or printable_problem(label, value)


def code_problem(label: str, value: str) -> str | None:
    """Codes and marks that go into spreadsheets (exposure classes, cap marks): printable, and
    not beginning like a formula."""
    return name_problem(label, value) or formula_problem(label, value)


def mark_problem(label: str, value: str) -> str | None:
    """A pile mark: printable, not like a formula, and no "/" (it is part of the pile's address)."""
    problem = code_problem(label, value)
    if problem:
        return problem
    if "/" in value:
        return (f"{label} must not contain '/': a pile's mark is part of every address of the pile, "
                f"so {value!r} could never be recorded or signed (write it with '-' or '.' instead)")
    return None


def invalid_text_in(data, where: str = "") -> tuple[str, str] | None:
    """(field path, message) for the first text in a decoded JSON value (dicts, lists, strings;
    keys included) that is not valid Unicode or holds a control character other than a line
    break or tab, else None. For a request body, before anything is stored: the field path
    ("record.strata[2].description") goes into the 422 answer."""
    stack = [(where, data)]
    while stack:
        path, value = stack.pop()
        if isinstance(value, str):
            problem = text_problem(path or "text", value)
            if problem:
                return path or "text", problem
        elif isinstance(value, dict):
            for key, item in value.items():
                name = f"{path}.{key}" if path else str(key)
                if isinstance(key, str) and text_problem("a field name", key):
                    return name, text_problem("a field name", key)
                stack.append((name, item))
        elif isinstance(value, list):
            stack.extend((f"{path}[{i}]", item) for i, item in enumerate(value))
    return None


# Characters an XLSX file (XML 1.0) cannot hold, and lone surrogates (not UTF-8).
_UNWRITABLE = re.compile("[\x00-\x08\x0b\x0c\x0e-\x1f\ud800-\udfff]")


def visible(text: str) -> str:
    """Text with every character a file cannot hold (controls XML forbids, lone surrogates)
    written as a visible escape ("\\x01", "\\ud800"), for text stored before it was refused."""
    return _UNWRITABLE.sub(lambda m: f"\\x{ord(m.group()):02x}" if ord(m.group()) < 0x100
                           else f"\\u{ord(m.group()):04x}", text)


def csv_cell(value):
    """A value for a CSV or XLSX cell: None as '', text made writable (:func:`visible`) and, when
    it begins like a formula, given a leading apostrophe (the spreadsheet then shows it as
    text); numbers as they are."""
    if value is None:
        return ""
    if isinstance(value, str):
        value = visible(value)
        if value.startswith(FORMULA_STARTS):
            return "'" + value
    return value
