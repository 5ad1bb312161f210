"""The Markdown report: the same content as the HTML report, figures as relative image links.

User-supplied text is made inert: ``<`` becomes ``&lt;`` (so no renderer turns a label into
an HTML tag) and table cells escape ``|``.

Examples
--------
>>> text = render_markdown({"schema": "causalcheck/vet/1", "estimate": 2.0, "std_error": 0.5,
...                         "t": 4.0, "dof": 100, "robustness_value": 0.32,
...                         "robustness_value_ci": 0.17, "partial_r2": 0.14})
>>> text.splitlines()[0], text.splitlines()[4]
('# Vetting a reported estimate', '## Verdict')
"""

from __future__ import annotations

import re
from collections.abc import Mapping
from typing import Any

from .sections import Bullets, FigureRef, Paragraph, Report, Table, build_report

__all__ = ["escape_markdown", "render_markdown", "render_report_markdown"]


def escape_markdown(text: str, *, cell: bool = False) -> str:
    """Make user text inert in Markdown: no HTML tags, no entities, and in cells no ``|``.

    Only a ``<`` that could open a tag, a comment or an autolink (followed by a letter, ``/``,
    ``!`` or ``?``; CommonMark spec, Sec. 6.5-6.6) is escaped, so that a path such as
    ``rebate <- garden`` or ``p < 0.001`` stays readable in the raw file.

    >>> escape_markdown("<script>alert(1)</script> & more")
    '&lt;script>alert(1)&lt;/script> & more'
    >>> escape_markdown("a <- b, p < 0.001, <!-- x --> <?php"), escape_markdown("a|b\\nc", cell=True)
    ('a <- b, p < 0.001, &lt;!-- x --> &lt;?php', 'a\\\\|b c')
    """
    text = re.sub(r"&(?=#?[A-Za-z0-9]+;)", "&amp;", str(text))
    text = re.sub(r"<(?=[A-Za-z/!?])", "&lt;", text)
    if cell:
        text = text.replace("|", "\\|").replace("\r", " ").replace("\n", " ")
    return text


def _table(table: Table) -> list[str]:
    lines = []
    if table.caption:
        lines += [f"**{escape_markdown(table.caption)}**", ""]
    header = [escape_markdown(h, cell=True) or " " for h in table.header]
    align = ["---:" if numeric else ":---" for numeric in table.numeric]
    lines.append("| " + " | ".join(header) + " |")
    lines.append("| " + " | ".join(align) + " |")
    for index, row in enumerate(table.rows):
        cells = [escape_markdown(c, cell=True) for c in row]
        if index in table.emphasis:
            cells = [f"**{c}**" if c else c for c in cells]
        lines.append("| " + " | ".join(cells) + " |")
    return lines


def render_report_markdown(report: Report) -> str:
    """Lay out a :class:`~causalcheck.report.sections.Report` as Markdown."""
    lines = [f"# {escape_markdown(report.title)}", ""]
    if report.subtitle and report.subtitle != report.title:
        lines += [f"*{escape_markdown(report.subtitle)}*", ""]
    lines += ["## Verdict", ""]
    verdict = report.verdict
    if verdict.lead:
        lines += [f"*{escape_markdown(verdict.lead)}*", ""]
    if verdict.findings:
        lines += [f"- {escape_markdown(sentence)}" for sentence in verdict.findings] + [""]
    if verdict.next_step:
        lines += [f"**{escape_markdown(verdict.next_step)}**", ""]
    for section in report.sections:
        lines += [f"## {escape_markdown(section.title)}", ""]
        for block in section.blocks:
            if isinstance(block, Paragraph):
                text = escape_markdown(block.text)
                if block.style == "quote":
                    lines += [f"> {text}", ""]
                elif block.style == "note":
                    lines += [f"*{text}*", ""]
                else:
                    lines += [text, ""]
            elif isinstance(block, Table):
                lines += _table(block) + [""]
            elif isinstance(block, FigureRef):
                lines += [f"![{escape_markdown(block.alt)}]({block.file})", "",
                          f"*{escape_markdown(block.caption)}*", ""]
            elif isinstance(block, Bullets):
                marker = "1." if block.numbered else "-"
                lines += [f"{marker} {escape_markdown(item)}" for item in block.items] + [""]
    lines.append("*Written by causalcheck. Every number here is in result.json.*")
    return "\n".join(lines).rstrip() + "\n"


def render_markdown(document: Mapping[str, Any], *, figures: list[str] | None = None) -> str:
    """The Markdown report of a result document (figures linked as ``graph.png`` etc.)."""
    return render_report_markdown(build_report(document, figures=figures))
