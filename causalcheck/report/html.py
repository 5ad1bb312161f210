"""The HTML report: one self-contained file a practitioner can forward as it is.

Figures are inline PNG data URIs, the style sheet is inline, there is no script and nothing is
fetched from the network. Every string that comes from the user or the data is escaped with
:func:`html.escape`. The page reads in the order a reader asks: the verdict first, then the
claim and the graph, the estimates, the decomposition, the sensitivity analysis, the tests of
the graph, notes, cautions, and the methods with their references. The style is plain and
prints well (A4 or Letter, black on white, no colour needed).

Examples
--------
>>> page = render_html({"schema": "causalcheck/vet/1", "estimate": 2.0, "std_error": 0.5,
...                     "t": 4.0, "dof": 100, "robustness_value": 0.32,
...                     "robustness_value_ci": 0.17, "partial_r2": 0.14}, images={})
>>> page.startswith("<!DOCTYPE html>"), "<script" in page, page.index('id="verdict"') < \\
...     page.index('id="claim"')
(True, False, True)
"""

from __future__ import annotations

import base64
import html
import struct
from collections.abc import Mapping
from typing import Any

from .. import __version__
from .sections import Bullets, FigureRef, Paragraph, Report, Table, build_report

__all__ = ["STYLE", "png_size", "render_html", "render_report_html"]

STYLE = """
:root { --ink: #1d2733; --soft: #5b6570; --rule: #c9ced4; --wash: #f3f4f6; }
* { box-sizing: border-box; }
html { font-size: 16px; }
body { margin: 0; color: var(--ink); background: #fff;
  font-family: Charter, "Bitstream Charter", "Sitka Text", Cambria, "Liberation Serif",
    Georgia, serif;
  line-height: 1.5; }
main { max-width: 50rem; margin: 0 auto; padding: 1.6rem 1.4rem 3rem; }
header { border-bottom: 2px solid var(--ink); padding-bottom: .5rem; margin-bottom: 1rem; }
h1, h2, h3, .kicker, figcaption, caption, th, nav, footer {
  font-family: "Avenir Next", "Segoe UI", "Helvetica Neue", "Liberation Sans", Arial,
    sans-serif; }
h1 { font-size: 1.7rem; line-height: 1.2; margin: .2rem 0 .3rem; }
.kicker { text-transform: uppercase; letter-spacing: .08em; font-size: .72rem;
  color: var(--soft); margin: 0; }
.subtitle { margin: 0; color: var(--soft); }
h2 { font-size: 1.15rem; margin: 2.2rem 0 .6rem; padding-top: .4rem;
  border-top: 1px solid var(--rule); }
#verdict { border-left: 5px solid var(--ink); background: var(--wash);
  padding: .8rem 1.1rem; margin: 1rem 0 1.2rem; }
#verdict h2 { border: 0; margin: 0 0 .3rem; padding: 0; font-size: .8rem;
  text-transform: uppercase; letter-spacing: .08em; }
#verdict p { margin: 0 0 .5rem; font-size: 1.04rem; }
#verdict p:last-child { margin-bottom: 0; }
#verdict p.lead { font-style: italic; }
#verdict ul.findings { margin: 0 0 .5rem; padding-left: 1.2rem; font-size: 1.04rem; }
#verdict ul.findings li { margin-bottom: .25rem; }
#verdict p.next { font-weight: 700; }
blockquote p { margin: 0; }
nav { font-size: .8rem; color: var(--soft); margin: .3rem 0 0; }
nav a { color: var(--soft); margin-right: .8rem; text-decoration: none;
  border-bottom: 1px dotted var(--soft); }
blockquote { margin: .8rem 0; padding: .2rem 0 .2rem 1rem; border-left: 3px solid var(--rule);
  font-style: italic; }
p.note { font-size: .86rem; color: var(--soft); }
figure { margin: 1.2rem 0; }
figure img { max-width: 100%; height: auto; display: block; border: 1px solid var(--rule); }
figcaption { font-size: .82rem; color: var(--soft); margin-top: .35rem; }
.table-wrap { overflow-x: auto; margin: .8rem 0 1.1rem; }
table { border-collapse: collapse; font-size: .86rem; min-width: 60%;
  font-variant-numeric: tabular-nums; border-top: 1.5px solid var(--ink);
  border-bottom: 1.5px solid var(--ink); }
caption { text-align: left; font-size: .82rem; font-weight: 600; padding: 0 0 .3rem;
  caption-side: top; }
th { font-size: .78rem; text-align: left; font-weight: 600; border-bottom: 1px solid var(--ink);
  padding: .3rem .6rem; vertical-align: bottom; }
td { padding: .25rem .6rem; vertical-align: top; border-bottom: 1px solid var(--wash); }
td.num, th.num { text-align: right; white-space: nowrap; }
tr.headline td { font-weight: 700; }
ul.cautions li, ul.references li { margin-bottom: .45rem; }
ul.references { font-size: .88rem; }
footer { margin-top: 2.5rem; font-size: .75rem; color: var(--soft);
  border-top: 1px solid var(--rule); padding-top: .5rem; }
@media print {
  html { font-size: 10.5pt; }
  main { max-width: none; padding: 0; }
  nav { display: none; }
  #verdict { background: none; border: 1.5pt solid #000; }
  h2 { break-after: avoid; }
  figure, .table-wrap, #verdict { break-inside: avoid; }
  figure img { border: 0; }
}
"""


def png_size(data: bytes) -> tuple[int, int] | None:
    """Width and height of a PNG from its IHDR chunk; ``None`` if it is not a PNG.

    >>> png_size(b"\\x89PNG\\r\\n\\x1a\\n" + b"\\x00\\x00\\x00\\rIHDR" + bytes([0, 0, 1, 0,
    ...          0, 0, 0, 200]) + b"\\x08\\x02\\x00\\x00\\x00")
    (256, 200)
    """
    if len(data) < 24 or data[:8] != b"\x89PNG\r\n\x1a\n" or data[12:16] != b"IHDR":
        return None
    width, height = struct.unpack(">II", data[16:24])
    return int(width), int(height)


def _e(text: Any) -> str:
    return html.escape(str(text), quote=True)


def _table(table: Table) -> str:
    parts = ['<div class="table-wrap"><table>']
    if table.caption:
        parts.append(f"<caption>{_e(table.caption)}</caption>")
    head = "".join(f'<th class="num" scope="col">{_e(h)}</th>' if numeric
                   else f'<th scope="col">{_e(h)}</th>'
                   for h, numeric in zip(table.header, table.numeric))
    parts.append(f"<thead><tr>{head}</tr></thead><tbody>")
    for index, row in enumerate(table.rows):
        cells = "".join(f'<td class="num">{_e(c)}</td>' if numeric else f"<td>{_e(c)}</td>"
                        for c, numeric in zip(row, table.numeric))
        css = ' class="headline"' if index in table.emphasis else ""
        parts.append(f"<tr{css}>{cells}</tr>")
    parts.append("</tbody></table></div>")
    return "".join(parts)


def _figure(block: FigureRef, images: Mapping[str, bytes]) -> str:
    data = images.get(block.name)
    if not data:
        return ""
    size = png_size(data)
    dims = ""
    if size is not None:
        # displayed at the figure's size in print points (150 dpi PNG → 96 px per inch)
        width, height = size
        dims = f' width="{round(width * 96 / 150)}" height="{round(height * 96 / 150)}"'
    uri = "data:image/png;base64," + base64.b64encode(data).decode("ascii")
    return (f'<figure id="figure-{_e(block.name)}"><img src="{uri}" alt="{_e(block.alt)}"'
            f"{dims}><figcaption>{_e(block.caption)}</figcaption></figure>")


def render_report_html(report: Report, images: Mapping[str, bytes]) -> str:
    """Lay out a :class:`~causalcheck.report.sections.Report` as one HTML page.

    ``images`` maps figure names to PNG bytes; a figure without bytes is left out.
    """
    body = ["<header>", '<p class="kicker">causalcheck report</p>',
            f"<h1>{_e(report.title)}</h1>"]
    if report.subtitle and report.subtitle != report.title:
        body.append(f'<p class="subtitle">{_e(report.subtitle)}</p>')
    links = "".join(f'<a href="#{_e(s.key)}">{_e(s.title)}</a>' for s in report.sections)
    body += [f'<nav aria-label="Sections">{links}</nav>', "</header>"]
    verdict = report.verdict
    parts = ['<section id="verdict" aria-label="Verdict"><h2>Verdict</h2>']
    if verdict.lead:
        parts.append(f'<p class="lead">{_e(verdict.lead)}</p>')
    if verdict.findings:
        # one finding a bullet: a reader scans the verdict before reading it
        items = "".join(f"<li>{_e(sentence)}</li>" for sentence in verdict.findings)
        parts.append(f'<ul class="findings">{items}</ul>')
    if verdict.next_step:
        parts.append(f'<p class="next">{_e(verdict.next_step)}</p>')
    parts.append("</section>")
    body.append("".join(parts))
    for section in report.sections:
        body.append(f'<section id="{_e(section.key)}"><h2>{_e(section.title)}</h2>')
        for block in section.blocks:
            if isinstance(block, Paragraph):
                if block.style == "quote":
                    body.append(f"<blockquote><p>{_e(block.text)}</p></blockquote>")
                elif block.style == "note":
                    body.append(f'<p class="note">{_e(block.text)}</p>')
                else:
                    body.append(f"<p>{_e(block.text)}</p>")
            elif isinstance(block, Table):
                body.append(_table(block))
            elif isinstance(block, FigureRef):
                body.append(_figure(block, images))
            elif isinstance(block, Bullets):
                tag = "ol" if block.numbered else "ul"
                css = {"cautions": ' class="cautions"', "methods": ' class="references"'}.get(
                    section.key, "")
                items = "".join(f"<li>{_e(item)}</li>" for item in block.items)
                body.append(f"<{tag}{css}>{items}</{tag}>")
        body.append("</section>")
    body.append(f"<footer>Written by causalcheck {_e(__version__)}. Every number in this "
                "report is also in result.json, which pipelines can read.</footer>")
    title = report.title if report.title else "causalcheck report"
    return ("<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n"
            "<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">\n"
            "<meta name=\"generator\" content=\"causalcheck\">\n"
            f"<title>{_e(title)}</title>\n<style>{STYLE}</style>\n</head>\n<body>\n<main>\n"
            + "\n".join(body) + "\n</main>\n</body>\n</html>\n")


def render_html(document: Mapping[str, Any], *, images: Mapping[str, bytes] | None = None
                ) -> str:
    """The HTML report of a result document.

    ``images`` maps figure names to PNG bytes; by default every figure the document supports
    is drawn.
    """
    if images is None:
        from .figures import figures_for, render_png

        images = {name: render_png(name, document) for name in figures_for(document)}
    report = build_report(document, figures=list(images))
    return render_report_html(report, images)
