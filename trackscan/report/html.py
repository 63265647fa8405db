"""Render the report document as one self-contained HTML page.

Images are embedded as base64 PNG data URIs (each links its SVG and PDF
files beside the page); the page loads nothing from the
network, prints cleanly (figures are not split across pages, collapsed
sections open for printing) and needs no script to read.
"""

from __future__ import annotations

import base64
from html import escape

from trackscan.report.document import BulletList, Document, Figure, Paragraph, Section, Table

__all__ = ["render_html", "CSS"]

CSS = """
:root { --ink: #1a1a1a; --muted: #5a5a5a; --rule: #d0d0d0; --accent: #0072B2;
        --note: #fff4dc; --note-rule: #E69F00; }
* { box-sizing: border-box; }
body { font-family: "DejaVu Sans", "Helvetica Neue", Arial, sans-serif; color: var(--ink);
       max-width: 1100px; margin: 1.5em auto; padding: 0 1.2em; line-height: 1.45;
       font-size: 15px; background: #fff; }
h1 { font-size: 1.55em; border-bottom: 3px solid var(--accent); padding-bottom: .25em; }
h2 { font-size: 1.2em; margin-top: 1.8em; border-bottom: 1px solid var(--rule); }
table { border-collapse: collapse; margin: .6em 0 1.2em; font-size: .9em; }
caption { caption-side: top; text-align: left; color: var(--muted); padding-bottom: .3em; }
th, td { border: 1px solid var(--rule); padding: .25em .5em; vertical-align: top;
         text-align: left; }
th { background: #eef4f9; }
td.num { text-align: right; font-variant-numeric: tabular-nums; white-space: nowrap; }
td.range { font-variant-numeric: tabular-nums; white-space: nowrap; }
.scroll { overflow-x: auto; }
figure { margin: 1em 0 1.6em; break-inside: avoid; page-break-inside: avoid; }
figure img { max-width: 100%; height: auto; border: 1px solid var(--rule); }
figcaption { color: var(--muted); font-size: .88em; margin-top: .3em; }
p.note { background: var(--note); border-left: 4px solid var(--note-rule);
         padding: .4em .7em; }
details > summary { cursor: pointer; font-weight: bold; margin: .5em 0; }
footer { margin-top: 2.5em; color: var(--muted); font-size: .8em;
         border-top: 1px solid var(--rule); padding-top: .5em; }
@media print {
  body { max-width: none; margin: 0; font-size: 11pt; }
  h2 { break-after: avoid; page-break-after: avoid; }
  table, tr { break-inside: avoid; page-break-inside: avoid; }
  .scroll { overflow: visible; }
  details > summary { list-style: none; }
}
"""

# Open collapsed sections when the page is printed (no network, inline only).
_PRINT_SCRIPT = ("window.addEventListener('beforeprint',function(){"
                 "document.querySelectorAll('details').forEach(function(d){d.open=true;});});")


def _is_number(text: str) -> bool:
    t = text.replace("−", "-").strip()
    try:
        float(t)
        return True
    except ValueError:
        return False


def _is_range(text: str) -> bool:
    """A coordinate range or an estimate with its uncertainty (kept on one line)."""
    return ("→" in text or "±" in text) and len(text) < 48


def _table(t: Table) -> str:
    out = [f'<div class="scroll"><table id="table-{escape(t.key)}">']
    if t.caption:
        out.append(f"<caption>{escape(t.caption)}</caption>")
    out.append("<thead><tr>" + "".join(f"<th>{escape(h)}</th>" for h in t.header)
               + "</tr></thead><tbody>")
    for row in t.rows:
        cells = "".join(
            f'<td class="num">{escape(c)}</td>' if _is_number(c)
            else f'<td class="range">{escape(c)}</td>' if _is_range(c)
            else f"<td>{escape(c)}</td>"
            for c in row)
        out.append(f"<tr>{cells}</tr>")
    out.append("</tbody></table></div>")
    return "\n".join(out)


#: CSS pixels per inch of printed figure width (figures show a little above print size).
_PX_PER_INCH = 120


def _figure(f: Figure) -> str:
    data = base64.b64encode(f.png).decode("ascii")
    width = int(round(f.width_in * _PX_PER_INCH))
    name = escape(f.name)
    return (f'<figure id="figure-{name}"><img src="data:image/png;base64,{data}" '
            f'alt="{escape(f.alt or f.name)}" style="width:{width}px">'
            f"<figcaption>{escape(f.caption)} <span class=\"files\">"
            f'(<a href="{name}.svg">SVG</a>, <a href="{name}.pdf">PDF</a>)</span>'
            "</figcaption></figure>")


def _block(b) -> str:
    if isinstance(b, Table):
        return _table(b)
    if isinstance(b, Figure):
        return _figure(b)
    if isinstance(b, Paragraph):
        cls = ' class="note"' if b.note else ""
        return f"<p{cls}>{escape(b.text)}</p>"
    if isinstance(b, BulletList):
        return "<ul>" + "".join(f"<li>{escape(i)}</li>" for i in b.items) + "</ul>"
    raise TypeError(f"unknown block {type(b).__name__}")


def _section(s: Section) -> str:
    body = "\n".join(_block(b) for b in s.blocks)
    if s.collapsible:
        return (f'<section id="{escape(s.key)}"><h2>{escape(s.title)}</h2>'
                f"<details><summary>Show {escape(s.title.lower())}</summary>\n{body}\n"
                "</details></section>")
    return f'<section id="{escape(s.key)}"><h2>{escape(s.title)}</h2>\n{body}\n</section>'


def render_html(doc: Document, *, footer: str = "") -> str:
    """The document as a complete HTML5 page (UTF-8 text)."""
    parts = ["<!DOCTYPE html>", '<html lang="en">', "<head>", '<meta charset="utf-8">',
             '<meta name="viewport" content="width=device-width, initial-scale=1">',
             f"<title>{escape(doc.title)}</title>", f"<style>{CSS}</style>",
             f"<script>{_PRINT_SCRIPT}</script>", "</head>", "<body>",
             f"<h1>{escape(doc.title)}</h1>"]
    parts += [_section(s) for s in doc.sections]
    if footer:
        parts.append(f"<footer>{escape(footer)}</footer>")
    parts += ["</body>", "</html>", ""]
    return "\n".join(parts)
