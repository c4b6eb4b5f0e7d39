"""``report.md``: the run's story in Markdown, sized for a CI job summary or a review comment.

Outcome first, then the overview table, then per endpoint the conclusion, the path taken and
the key numbers. With more than :data:`COMPACT_AFTER` endpoints each endpoint gets a few lines
only (the full tables are in report.html), so a 20-endpoint plan stays well under 300 lines.

Markdown has no autoescaping of its own: every value printed by the template passes through
:func:`md_text` (the environment's ``finalize``), which turns characters with a meaning in
Markdown or HTML (``| < > & * _ [ ] ` \\`` and line breaks) into literal text, so a group
named ``<script>`` or ``a|b`` stays text and never breaks a table. Only values the renderer
builds itself are marked safe (:class:`markupsafe.Markup`).
"""

from __future__ import annotations

import re
from functools import lru_cache
from typing import Any, Mapping, Sequence

from markupsafe import Markup

from . import render as _r

__all__ = ["COMPACT_AFTER", "markdown_environment", "md_text", "render_markdown"]

#: Above this many endpoints each endpoint's section is kept to a few lines.
COMPACT_AFTER = 4

_SPECIAL = re.compile(r"([\\`*_\[\]|#~])")


def md_text(value: Any) -> str:
    """``value`` as literal Markdown text, safe inside a table cell.

    HTML-significant characters become entities, Markdown punctuation is backslash-escaped,
    and line breaks become spaces (a table row is one line). :class:`~markupsafe.Markup`
    values pass through unchanged.
    """
    if isinstance(value, Markup):
        return str(value)
    if value is None:
        return "—"
    text = str(value)
    text = text.replace("&", "&amp;").replace("<", "&lt;").replace(">", "&gt;")
    text = _SPECIAL.sub(r"\\\1", text)
    return re.sub(r"\s*[\r\n]+\s*", " ", text)


def _anchor(slug: str) -> Markup:
    """A heading anchor for a link target: only word characters and hyphens survive."""
    return Markup(re.sub(r"[^\w-]", "", slug))


def _hex(value: Any) -> Markup:
    """A hex digest in a code span (anything else is shown escaped, without the span)."""
    text = str(value or "")
    if re.fullmatch(r"[0-9a-f]{8,128}", text):
        return Markup(f"`{text}`")
    return Markup(md_text(text or "—"))


@lru_cache(maxsize=1)
def markdown_environment() -> Any:
    """The Jinja2 environment for Markdown: no HTML autoescape, every value through md_text."""
    import jinja2

    env = jinja2.Environment(
        loader=jinja2.PackageLoader("planrunner.report", "templates"),
        autoescape=False,
        finalize=md_text,
        undefined=jinja2.StrictUndefined,
        trim_blocks=True,
        lstrip_blocks=True,
        keep_trailing_newline=True,
    )
    env.filters.update(_r.template_filters(), anchor=_anchor, hex=_hex)
    return env


def render_markdown(results: Mapping[str, Any], records: Sequence[Mapping[str, Any]]) -> str:
    """The text of report.md for a run's results and decision records."""
    view = _r.build_view(results, records)
    view["compact"] = len(view["endpoints"]) > COMPACT_AFTER
    text = markdown_environment().get_template("report.md").render(v=view)
    # at most one blank line in a row, and exactly one final newline
    text = re.sub(r"\n{3,}", "\n\n", text).strip() + "\n"
    return text
