"""Render a built :class:`~kinfit.report.content.Report` as Markdown (figures linked from the
``figures/`` folder) and as one self-contained HTML file (figures embedded as base64 PNG,
equations as inline SVG, styles inline: nothing is fetched from anywhere).
"""

from __future__ import annotations

import base64
import html
from collections.abc import Callable
from typing import Any

from kinfit.report.content import Report, Table

__all__ = ["to_markdown", "to_html", "FIGURE_DIR"]

FIGURE_DIR = "figures"
_TONE_PREFIX = {"warning": "**Warning.** ", "note": "", "ok": "", "plain": ""}


def _md_cell(text: str) -> str:
    return str(text).replace("|", "\\|").replace("\n", " ")


def _md_table(t: Table) -> list[str]:
    out = [f"**Table {t.number}.** {t.caption}"
           + (f" Numbers: [{t.csv}]({t.csv})." if t.csv else ""), ""]
    out.append("| " + " | ".join(_md_cell(h) for h in t.header) + " |")
    out.append("|" + "|".join("---:" if t.is_numeric(j) else "---"
                              for j in range(len(t.header))) + "|")
    for i, row in enumerate(t.rows):
        cells = []
        for j, c in enumerate(row):
            tone = t.cell_tone(i, j)
            text = _md_cell(c)
            cells.append(f"**{text}**" if tone == "fail" and text else text)
        out.append("| " + " | ".join(cells) + " |")
    return out


def to_markdown(report: Report) -> str:
    """The report as Markdown; equations as ``$$ ... $$`` blocks (LaTeX), figures as PNG
    images with a link to the SVG."""
    lines = [f"# {report.title}", "", f"*{report.subtitle}*", ""]
    lines += [f"> **Status:** {report.status}", ""]
    lines.append("Contents: " + " · ".join(f"{i}. {s.title}"
                                           for i, s in enumerate(report.sections, 1)))
    lines.append("")
    eq = 0
    for i, sec in enumerate(report.sections, 1):
        lines += [f"## {i}. {sec.title}", ""]
        for b in sec.blocks:
            kind = b.kind
            if kind == "text":
                prefix = _TONE_PREFIX.get(b.tone, "")
                lines.append(f"> {prefix}{b.text}" if b.tone in ("warning", "note")
                              else b.text)
            elif kind == "items":
                lines += [f"- {item}" for item in b.items]
            elif kind == "details":
                lines += [f"*{b.summary}:*", ""] + [f"- {item}" for item in b.items]
            elif kind == "facts":
                lines += [f"- **{k}:** {v}" for k, v in b.pairs]
            elif kind == "heading":
                lines.append(f"### {b.text}")
            elif kind == "equation":
                eq += 1
                lines += ["$$", b.latex + f" \\qquad ({eq})", "$$", f"*({eq}) {b.what}*"]
            elif kind == "table":
                lines += _md_table(b)
            elif kind == "figure":
                lines += [f"![{b.alt}]({FIGURE_DIR}/{b.key}.png)", "",
                          f"**Figure {b.number}.** {b.caption} "
                          f"([SVG]({FIGURE_DIR}/{b.key}.svg))"]
            elif kind == "code":
                if b.caption:
                    lines.append(f"*{b.caption}:*")
                    lines.append("")
                lines += ["```", b.text, "```"]
            lines.append("")
    if report.notes:
        lines += ["---", "", "Notes on this report:", ""]
        lines += [f"- {n}" for n in report.notes]
        lines.append("")
    return "\n".join(lines)


def _equation_renderer() -> Callable[[str], Any]:
    """latex -> Markup of an inline SVG (cached), or an escaped code span when mathtext
    cannot draw it."""
    from markupsafe import Markup

    from kinfit.report.equations import equation_svg

    cache: dict[str, Any] = {}

    def render(latex: str) -> Any:
        if latex not in cache:
            svg = equation_svg(latex, prefix=f"eq{len(cache) + 1}")
            if svg is None:
                cache[latex] = Markup(f'<code class="eq-src">{html.escape(latex)}</code>')
            else:
                label = html.escape(latex, quote=True)
                cache[latex] = Markup(svg.replace("<svg ", f'<svg aria-label="{label}" ', 1))
        return cache[latex]

    return render


def to_html(report: Report) -> str:
    """The report as one self-contained HTML document (Jinja2 template
    ``templates/report.html.j2``)."""
    import jinja2

    env = jinja2.Environment(loader=jinja2.PackageLoader("kinfit.report", "templates"),
                             autoescape=True, trim_blocks=True, lstrip_blocks=True,
                             undefined=jinja2.StrictUndefined)
    template = env.get_template("report.html.j2")
    from kinfit import __version__

    return template.render(
        report=report, version=__version__, equation=_equation_renderer(),
        png_b64=lambda fig: base64.b64encode(fig.png).decode("ascii"),
    )
