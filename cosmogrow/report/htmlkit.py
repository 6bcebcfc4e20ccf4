"""Small, escaping-by-default HTML building blocks for the web report.

Every helper here treats its text arguments as untrusted (catalogue ids, sample names, paths,
configuration values, warnings) and escapes them, unless the argument is a `Markup`, i.e. HTML this
package built itself from escaped parts. Nothing here reads files except `figure`, which embeds a
PNG as a base64 data URI so that the page needs no other file and makes no network request.
"""

import base64
import html
import json
import math
import struct

_SUPERSCRIPT = str.maketrans("0123456789-+", "⁰¹²³⁴⁵⁶⁷⁸⁹⁻⁺")
MINUS = "\u2212"


class Markup(str):
    """HTML that is safe to insert as is (built from escaped parts)."""

    def __add__(self, other):
        return Markup(str.__add__(self, esc(other)))

    def __radd__(self, other):
        return Markup(str.__add__(str(esc(other)), str(self)))


def esc(value):
    """Escaped text of any value; a `Markup` passes through unchanged."""
    if isinstance(value, Markup):
        return value
    return Markup(html.escape(str(value), quote=True))


def join(parts, sep=""):
    """Join escaped parts into one `Markup`."""
    return Markup(esc(sep).join(esc(part) for part in parts))


def tag(name, content="", **attrs):
    """``<name attrs>content</name>``; attribute names use ``_`` for ``-`` and ``cls`` for class."""
    rendered = "".join(f' {_attr_name(k)}="{esc(v)}"' for k, v in attrs.items() if v is not None)
    return Markup(f"<{name}{rendered}>{esc(content)}</{name}>")


def _attr_name(key):
    return "class" if key == "cls" else key.rstrip("_").replace("_", "-")


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
        return "–"
    if isinstance(value, bool):
        return "yes" if value else "no"
    if isinstance(value, int):
        text = f"{value:+d}" if signed else f"{value:d}"
        return text.replace("-", MINUS)
    number = as_float(value)
    if number is None:
        if isinstance(value, float):
            return "∞" if value == math.inf else (f"{MINUS}∞" if value == -math.inf else "–")
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
        return "–"
    return f"[{fmt(pair[0], digits)}, {fmt(pair[1], digits)}]"


def fmt_p(value):
    """A probability or p-value with sensible digits."""
    number = as_float(value)
    if number is None:
        return fmt(value)
    if 0 < number < 1e-3:
        return fmt(number, 2)
    return f"{number:.3f}"


def pill(text, tone):
    """A small status label; tone is one of good, bad, warn, info, muted."""
    return tag("span", text, cls=f"pill pill-{tone}")


class Cell:
    """A table cell with a CSS class (e.g. ``num``, ``bad``) and an optional hover title."""

    def __init__(self, content, cls=None, title=None):
        self.content, self.cls, self.title = content, cls, title


def table(headers, rows, *, caption=None, number=None, cls="data", numeric=None, narrow=False):
    """An HTML table; `numeric` lists the column indices to right-align (default: all but the first).

    Cells may be text, numbers (formatted with `fmt`), `Markup` or `Cell`. `number` is the table's
    number or a callable giving it (called only here, so that tables not drawn take no number).
    """
    number = number() if callable(number) else number
    numeric = set(range(1, len(headers))) if numeric is None else set(numeric)
    head = join(tag("th", h, cls="num" if i in numeric else None, scope="col")
                for i, h in enumerate(headers))
    body = []
    for row in rows:
        cells = []
        for i, cell in enumerate(row):
            extra, title = None, None
            if isinstance(cell, Cell):
                cell, extra, title = cell.content, cell.cls, cell.title
            if cell is None or (isinstance(cell, (int, float)) and not isinstance(cell, bool)):
                cell = fmt(cell)
            classes = " ".join(c for c in ("num" if i in numeric else None, extra) if c)
            cells.append(tag("th" if i == 0 else "td", cell, cls=classes or None, title=title,
                             scope="row" if i == 0 else None))
        body.append(tag("tr", join(cells)))
    label = None
    if caption is not None:
        prefix = Markup(f'<span class="label">Table {number}.</span> ') if number else Markup("")
        label = tag("caption", prefix + esc(caption))
    return tag("div", tag("table", join([label or "", tag("thead", tag("tr", head)),
                                         tag("tbody", join(body))]),
                          cls=f"{cls} narrow" if narrow else cls), cls="table-wrap")


def definition_list(pairs, cls="facts"):
    """A two-column list of facts: (term, value) pairs."""
    return tag("dl", join(tag("dt", term) + tag("dd", value) for term, value in pairs), cls=cls)


def png_size(data):
    """(width, height) in pixels from a PNG header, or None when the bytes are not a PNG."""
    if len(data) >= 24 and data[:8] == b"\x89PNG\r\n\x1a\n" and data[12:16] == b"IHDR":
        return struct.unpack(">II", data[16:24])
    return None


def figure(data, caption, *, number=None, name="", wide=False):
    """A figure with the PNG bytes embedded as a base64 data URI.

    Parameters
    ----------
    data : bytes, the PNG file's content
    caption : str or Markup
    number : int, optional, the figure's number on the page
    name : str, the file name (shown in the caption, escaped)
    wide : bool, span the whole content width
    """
    number = number() if callable(number) else number
    size = png_size(data)
    uri = "data:image/png;base64," + base64.b64encode(data).decode("ascii")
    width, height = size if size else (None, None)
    image = tag("img", "", src=uri, alt=f"{name}: {caption}" if name else str(caption),
                width=width, height=height, data_file=name or None)
    image = Markup(str(image).replace("></img>", ">"))
    prefix = Markup(f'<span class="label">Figure {number}.</span> ') if number else Markup("")
    source = tag("span", name, cls="file") if name else Markup("")
    return tag("figure", image + tag("figcaption", prefix + esc(caption) + " " + source),
               cls="fig wide" if wide else "fig")


def pretty_json(value, limit=20000):
    """Indented JSON of a value as an escaped <pre> block (cut at `limit` characters)."""
    try:
        text = json.dumps(value, indent=2, ensure_ascii=False, sort_keys=False, default=str)
    except (TypeError, ValueError):
        text = repr(value)
    if len(text) > limit:
        text = text[:limit] + "\n… (cut)"
    return tag("pre", text, cls="json")


def details(summary, content, *, open_=False):
    """A collapsible block (native HTML, no script)."""
    return tag("details", tag("summary", summary) + esc(content), open="open" if open_ else None)


class Numbering:
    """Running numbers of the page's tables and figures."""

    def __init__(self):
        self.tables = 0
        self.figures = 0

    def table(self):
        self.tables += 1
        return self.tables

    def figure(self):
        self.figures += 1
        return self.figures


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
