"""A small HTML builder for the self-contained reports: escaped text, tables, embedded
images and the one inline style sheet (screen and print).

Every piece of text that reaches the page goes through :func:`html.escape`; the page
needs no script and names no external address, so it opens offline and prints as it
shows.
"""

from __future__ import annotations

import base64
import html
import math
from collections.abc import Iterable, Sequence
from typing import Any

STYLE = """
:root { --ink: #1d2327; --muted: #5b6670; --rule: #c9d1d8; --band: #f3f6f8;
        --accent: #2f5d8a; --warn: #8a4b00; --bad: #a1161f; }
* { box-sizing: border-box; }
body { font: 14px/1.45 "DejaVu Sans", "Helvetica Neue", Arial, sans-serif; color: var(--ink);
       background: #fff; margin: 0 auto; padding: 24px 32px 48px; max-width: 1180px; }
header { border-bottom: 3px solid var(--accent); padding-bottom: 10px; margin-bottom: 14px; }
h1 { font-size: 24px; margin: 0 0 4px; }
h2 { font-size: 19px; margin: 28px 0 8px; padding-bottom: 3px;
     border-bottom: 1px solid var(--rule); color: var(--accent); }
h3 { font-size: 15px; margin: 18px 0 6px; }
p { margin: 6px 0; }
.muted, .note { color: var(--muted); }
.note { font-size: 12.5px; }
.identity { display: grid; grid-template-columns: max-content 1fr; gap: 2px 14px;
            font-size: 13px; margin: 8px 0; }
.identity dt { color: var(--muted); }
.identity dd { margin: 0; overflow-wrap: anywhere; }
code, .mono { font-family: "DejaVu Sans Mono", Menlo, Consolas, monospace; font-size: 12.5px; }
pre.description { white-space: pre-wrap; background: var(--band); border-left: 3px solid
                  var(--rule); padding: 8px 12px; font-size: 12.5px; margin: 8px 0; }
.caution { border: 2px solid var(--warn); background: #fff8ec; padding: 8px 12px;
           margin: 12px 0; font-size: 13.5px; }
.caution strong { color: var(--warn); }
.headline { display: flex; flex-wrap: wrap; gap: 10px; margin: 12px 0; }
.headline div { border: 1px solid var(--rule); border-radius: 4px; padding: 6px 12px;
                min-width: 170px; }
.headline b { display: block; font-size: 18px; }
.headline span { color: var(--muted); font-size: 12px; }
table { border-collapse: collapse; margin: 6px 0 12px; font-size: 13px; }
th, td { border-bottom: 1px solid var(--rule); padding: 3px 10px; text-align: left;
         vertical-align: top; }
th { background: var(--band); font-weight: 600; }
td.num, th.num { text-align: right; font-variant-numeric: tabular-nums; white-space: nowrap; }
tr.bad td { color: var(--bad); font-weight: 600; }
tr.changed td { font-weight: 600; }
td:first-child { white-space: nowrap; }
.wide { overflow-x: auto; }
ul.warnings li { color: var(--warn); }
figure { margin: 10px 0 16px; }
figure img { max-width: 100%; height: auto; border: 1px solid var(--rule); }
figcaption { color: var(--muted); font-size: 12.5px; }
footer { margin-top: 32px; border-top: 1px solid var(--rule); padding-top: 8px; }
@page { size: A4; margin: 14mm 12mm; }
@media print {
  body { max-width: none; padding: 0; font-size: 11.5px; }
  section.page { break-before: page; }
  h2, h3 { break-after: avoid; }
  table { break-inside: auto; }
  tr, figure, .caution, .headline div { break-inside: avoid; }
  thead { display: table-header-group; }
  th { background: #eef1f4; -webkit-print-color-adjust: exact; print-color-adjust: exact; }
  figure img { max-height: 235mm; }
}
"""
"""The report's style sheet: light backgrounds only, and for print a page break before
each ``section.page``, no table row split across pages, repeated table headings."""


def esc(value: Any) -> str:
    """Text for the page, escaped (quotes too, so it is also safe inside attributes)."""
    return html.escape(str(value), quote=True)


def tag(name: str, content: str = "", **attrs: Any) -> str:
    """``<name attrs>content</name>``; ``content`` is HTML already escaped, attribute
    values are escaped here (``class_`` stands for ``class``; None leaves one out)."""
    parts = "".join(f' {k.rstrip("_").replace("_", "-")}="{esc(v)}"'
                    for k, v in attrs.items() if v is not None)
    return f"<{name}{parts}>{content}</{name}>"


def para(text: str, *, cls: str | None = None) -> str:
    """A paragraph of plain text (escaped)."""
    return tag("p", esc(text), class_=cls)


def num(value: Any, spec: str = ".4g") -> str:
    """A number as the tables show it; ``-`` for none, text for anything else."""
    if value is None:
        return "-"
    if isinstance(value, bool):
        return "yes" if value else "no"
    if isinstance(value, int):
        return str(value)
    if isinstance(value, float):
        return "-" if math.isnan(value) else format(value, spec)
    return str(value)


def pm(value: Any, error: Any, spec: str = ".2f", error_spec: str = ".2g") -> str:
    """``value ± error`` (the ± left out where no estimate was made)."""
    text = num(value, spec)
    if isinstance(error, int | float) and not isinstance(error, bool):
        text += f" ± {format(error, error_spec)}"
    return text


class Cell:
    """A table cell: escaped text, right-aligned when it is a figure."""

    def __init__(self, text: Any, *, figure: bool = False) -> None:
        self.text = str(text)
        self.figure = figure


def figure_cell(text: Any) -> Cell:
    """A right-aligned cell holding a figure."""
    return Cell(text, figure=True)


def table(headers: Sequence[str | Cell], rows: Iterable[Sequence[Any]], *,
          caption: str | None = None, bad_rows: Iterable[int] = (),
          mark: str = "bad") -> str:
    """An HTML table; cells are plain text (escaped) or :class:`Cell`. Headers whose
    column holds figures are right-aligned with it. ``bad_rows`` get the class ``mark``
    (``bad``: red, a limit exceeded; ``changed``: bold)."""
    rows = [list(r) for r in rows]
    bad = set(bad_rows)

    def cell(kind: str, c: Any, figure: bool) -> str:
        if isinstance(c, Cell):
            figure = c.figure
            c = c.text
        return tag(kind, esc(c), class_="num" if figure else None)

    figures = [any(isinstance(r[i], Cell) and r[i].figure for r in rows if i < len(r))
               for i in range(len(headers))]
    head = tag("tr", "".join(cell("th", h, figures[i]) for i, h in enumerate(headers)))
    body = "".join(tag("tr", "".join(cell("td", c, False) for c in r),
                       class_=mark if i in bad else None) for i, r in enumerate(rows))
    cap = tag("caption", esc(caption)) if caption else ""
    return tag("table", cap + tag("thead", head) + tag("tbody", body))


def data_uri(data: bytes, mime: str = "image/png") -> str:
    """``data:`` address of the bytes (base64), so the page carries its images."""
    return f"data:{mime};base64," + base64.b64encode(data).decode("ascii")


def image(data: bytes, *, alt: str, caption: str | None = None) -> str:
    """An embedded PNG in a figure with its caption."""
    img = f'<img src="{data_uri(data)}" alt="{esc(alt)}">'
    return tag("figure", img + (tag("figcaption", esc(caption)) if caption else ""))


def section(title: str, body: str, *, page: bool = True, anchor: str | None = None) -> str:
    """A section with its heading; ``page`` starts it on a new printed page."""
    return tag("section", tag("h2", esc(title)) + body,
               class_="page" if page else None, id=anchor)


def definitions(pairs: Iterable[tuple[str, str]]) -> str:
    """A two-column list of labels and (escaped) values."""
    return tag("dl", "".join(tag("dt", esc(k)) + tag("dd", esc(v)) for k, v in pairs),
               class_="identity")


def document(title: str, body: str) -> str:
    """The whole page: doctype, metadata, the inline style sheet and the body."""
    return ("<!DOCTYPE html>\n" + tag("html", tag(
        "head", '<meta charset="utf-8">'
        '<meta name="viewport" content="width=device-width, initial-scale=1">'
        + tag("title", esc(title)) + tag("style", STYLE))
        + tag("body", body), lang="en") + "\n")
