"""Numbers as text, and the plain data the page templates draw: tables, cells, figures, facts.

Nothing here writes HTML. Section context functions build `Table`, `Cell` and `Figure` values from
results files; the Jinja2 templates (autoescaping) turn them into markup, so every text that comes
from a catalogue, a configuration or a results file is escaped by the template engine. Only
`markupsafe.Markup` values built here from escaped parts (e.g. parameter labels) pass unescaped.
"""

import base64
import json
import math
import struct
from dataclasses import dataclass, field

from markupsafe import Markup

_SUPERSCRIPT = str.maketrans("0123456789-+", "⁰¹²³⁴⁵⁶⁷⁸⁹⁻⁺")
MINUS = "\u2212"
DASH = "–"


def dig(mapping, *keys, default=None):
    """mapping[k1][k2]... or `default` when a key is absent or a level is not a dict/list."""
    value = mapping
    for key in keys:
        if isinstance(value, dict) and key in value:
            value = value[key]
        elif isinstance(value, (list, tuple)) and isinstance(key, int) and -len(value) <= key < len(value):
            value = value[key]
        else:
            return default
    return value


def as_float(value):
    """A finite float, or None for anything else (None, text, NaN, bool)."""
    if isinstance(value, bool) or value is None:
        return None
    try:
        number = float(value)
    except (TypeError, ValueError):
        return None
    return number if math.isfinite(number) else None


def fmt(value, digits=3, *, signed=False):
    """Plain text of a number for the page (true minus sign, ×10ⁿ for very large or small values).

    Non-numbers are shown as text; None, NaN and missing values as an en dash.
    """
    if value is None:
        return DASH
    if isinstance(value, bool):
        return "yes" if value else "no"
    if isinstance(value, int):
        text = f"{value:+d}" if signed else f"{value:d}"
        return text.replace("-", MINUS)
    number = as_float(value)
    if number is None:
        if isinstance(value, float):
            return "∞" if value == math.inf else (f"{MINUS}∞" if value == -math.inf else DASH)
        return str(value)
    sign = "+" if signed else ""
    if number != 0 and (abs(number) >= 1e4 or abs(number) < min(1e-3, 10.0 ** (-digits))):
        mantissa, exponent = f"{number:{sign}.{max(digits - 1, 1)}e}".split("e")
        text = f"{mantissa}×10{str(int(exponent)).translate(_SUPERSCRIPT)}"
    else:
        text = f"{number:{sign}.{digits}f}"
    return text.replace("-", MINUS)


def fmt_sig(value, figures=3):
    """A number with `figures` significant figures (×10ⁿ outside 10⁻³ … 10⁴)."""
    number = as_float(value)
    if number is None or number == 0:
        return fmt(value)
    if abs(number) >= 1e4 or abs(number) < 1e-3:
        return fmt(number, figures)
    decimals = max(figures - 1 - math.floor(math.log10(abs(number))), 0)
    return fmt(float(f"{number:.{figures}g}"), decimals)


def fmt_interval(pair, digits=3):
    """``[lo, hi]`` as text, or an en dash."""
    if not isinstance(pair, (list, tuple)) or len(pair) != 2:
        return DASH
    return f"[{fmt(pair[0], digits)}, {fmt(pair[1], digits)}]"


def fmt_p(value):
    """A probability or p-value with sensible digits."""
    number = as_float(value)
    if number is None:
        return fmt(value)
    if 0 < number < 1e-3:
        return fmt(number, 2)
    return f"{number:.3f}"


@dataclass(frozen=True)
class Cell:
    """A table cell: its text (or `Markup`), a CSS class (e.g. ``bad``) and an optional hover title."""

    content: object
    cls: str | None = None
    title: str | None = None


@dataclass(frozen=True)
class Table:
    """A table as the `table` macro of the templates draws it.

    Attributes
    ----------
    headers : tuple of str
    rows : tuple of tuple of Cell; the first cell of a row is its header cell
    caption : str or None; a captioned table takes the page's next table number
    numeric : frozenset of int, the right-aligned column indices
    narrow : bool, as wide as its content rather than the page
    """

    headers: tuple
    rows: tuple
    caption: str | None = None
    numeric: frozenset = field(default_factory=frozenset)
    narrow: bool = False


def table(headers, rows, *, caption=None, numeric=None, narrow=False):
    """A `Table`; `numeric` lists the columns to right-align (default: all but the first).

    Cells may be text, numbers (formatted with `fmt`), `Markup` or `Cell`.
    """
    numeric = frozenset(range(1, len(headers))) if numeric is None else frozenset(numeric)
    cells = tuple(tuple(_cell(value) for value in row) for row in rows)
    return Table(tuple(headers), cells, caption, numeric, narrow)


def _cell(value):
    if isinstance(value, Cell):
        return value
    if value is None or (isinstance(value, (int, float)) and not isinstance(value, bool)):
        return Cell(fmt(value))
    return Cell(value)


def png_size(data):
    """(width, height) in pixels from a PNG header, or None when the bytes are not a PNG."""
    if len(data) >= 24 and data[:8] == b"\x89PNG\r\n\x1a\n" and data[12:16] == b"IHDR":
        return struct.unpack(">II", data[16:24])
    return None


@dataclass(frozen=True)
class Figure:
    """A PNG embedded as a base64 data URI (the page needs no other file)."""

    uri: str
    caption: str
    name: str
    wide: bool = False
    width: int | None = None
    height: int | None = None


def figure(data, caption, *, name="", wide=False):
    """A `Figure` of PNG bytes; width and height from the PNG header when present."""
    width, height = png_size(data) or (None, None)
    uri = "data:image/png;base64," + base64.b64encode(data).decode("ascii")
    return Figure(uri, caption, name, wide, width, height)


def pretty_json(value, limit=20000):
    """Indented JSON text of a value (cut at `limit` characters)."""
    try:
        text = json.dumps(value, indent=2, ensure_ascii=False, sort_keys=False, default=str)
    except (TypeError, ValueError):
        text = repr(value)
    return text[:limit] + "\n… (cut)" if len(text) > limit else text


def flat_scalars(value, prefix="", *, limit=80, skip=()):
    """(dotted path, scalar) pairs of a nested JSON value, for blocks of unknown shape.

    Lists of scalars are kept whole (shown as text); keys in `skip` are left out at every level.
    """
    out = []

    def walk(item, path):
        if len(out) >= limit:
            return
        if isinstance(item, dict):
            for key, sub in item.items():
                if key not in skip:
                    walk(sub, f"{path}.{key}" if path else str(key))
        elif isinstance(item, list) and item and all(isinstance(v, dict) for v in item):
            for i, sub in enumerate(item):
                walk(sub, f"{path}[{i}]")
        elif isinstance(item, list):
            if len(item) <= 8:
                out.append((path, "[" + ", ".join(fmt(v) if not isinstance(v, str) else v for v in item) + "]"))
        else:
            out.append((path, item))

    walk(value, prefix)
    return out


# What a context function may raise on a results file of unexpected layout.
RENDER_ERRORS = (KeyError, TypeError, ValueError, AttributeError, IndexError, ZeroDivisionError)


def safely(function, *args, fallback=None):
    """Call a context function; on an unexpected file layout return (fallback, the error text)."""
    try:
        return function(*args), None
    except RENDER_ERRORS as exc:
        return fallback, f"{type(exc).__name__}: {exc}"


class Numbering:
    """Running numbers of the page's tables and figures (called by the templates in reading order)."""

    def __init__(self):
        self.tables = 0
        self.figures = 0

    def table(self):
        self.tables += 1
        return self.tables

    def figure(self):
        self.figures += 1
        return self.figures


__all__ = ["Cell", "Figure", "Markup", "Numbering", "Table", "as_float", "dig", "figure", "flat_scalars",
           "fmt", "fmt_interval", "fmt_p", "fmt_sig", "pretty_json", "safely", "table"]
