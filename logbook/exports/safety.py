"""The safety list (logbook.cautions) in each export format, one renderer per format (pure).

Every rendering keeps the list's structure: the title, the warning apart from the other
items and first, the items, the deferral line.
"""

from __future__ import annotations

from collections.abc import Callable
from html import escape

from logbook.cautions import SAFETY, Safety


def md_lines(esc: Callable[[str], str], safety: Safety = SAFETY, level: str = "##") -> list[str]:
    """Markdown: a heading, the warning as its own bold-led paragraph, the items, the deferral."""
    out = ["", f"{level} {esc(safety.title)}", "",
           f"**{esc(safety.sign)} {esc(safety.warning_label)}:** {esc(safety.warning)}", ""]
    out += [f"- {esc(item)}" for item in safety.items]
    return out + ["", esc(safety.deferral)]


def html_lines(safety: Safety = SAFETY) -> list[str]:
    """HTML: a section with the warning in its own paragraph, the items as a list, the deferral."""
    out = ['<section class="safety">', f"<h2>{escape(safety.title)}</h2>",
           f'<p class="warning"><strong>{escape(safety.sign)} {escape(safety.warning_label)}:</strong> '
           f"{escape(safety.warning)}</p>", "<ul>"]
    out += [f"<li>{escape(item)}</li>" for item in safety.items]
    return out + ["</ul>", f'<p class="deferral">{escape(safety.deferral)}</p>', "</section>"]


#: Style of the section, shared by the html exports.
CSS = (".safety{border:2px solid #b35900;background:#fff6eb;padding:.3em 1em;margin:1em 0}"
       ".safety .warning{font-weight:bold;border-left:.4em solid #b30000;padding-left:.5em}")


def comment_lines(safety: Safety = SAFETY) -> list[str]:
    """CSV comment cells (a leading "#", which the importer skips): title, warning, items, deferral."""
    return [f"# {safety.title}"] + [f"# {line}" for line in safety.lines()]
