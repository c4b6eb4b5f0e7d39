"""``report.html``: one self-contained page (inline CSS and SVG, no scripts, nothing fetched).

The page is rendered by Jinja2 with autoescaping on, so every text that comes from the plan or
the data (group names, column names, the question, reasons) is shown as text, never as markup.
The decision-path drawing is written by the template itself (autoescaped as well); the
matplotlib figures of :mod:`planrunner.report.figures` are inserted as SVG, their text escaped
by matplotlib.
"""

from __future__ import annotations

from functools import lru_cache
from typing import Any, Mapping, Sequence

from markupsafe import Markup

from . import render as _r

__all__ = ["html_environment", "render_html"]


@lru_cache(maxsize=1)
def html_environment() -> Any:
    """The Jinja2 environment for HTML templates: autoescape on, undefined names are errors."""
    import jinja2

    env = jinja2.Environment(
        loader=jinja2.PackageLoader("planrunner.report", "templates"),
        autoescape=jinja2.select_autoescape(enabled_extensions=("html", "svg"),
                                            default_for_string=True, default=True),
        undefined=jinja2.StrictUndefined,
        trim_blocks=True,
        lstrip_blocks=True,
        keep_trailing_newline=True,
    )
    env.filters.update(_r.template_filters())
    return env


def render_html(results: Mapping[str, Any], records: Sequence[Mapping[str, Any]], *,
                figures: bool = True) -> str:
    """The text of report.html for a run's results and decision records.

    ``figures=False`` leaves out the matplotlib figures (the decision-path drawing stays).
    """
    view = _r.build_view(results, records)
    if figures:
        from .figures import endpoint_figures

        for ep in view["endpoints"]:
            figs, notes = endpoint_figures(ep["e"], index=ep["index"])
            ep["figures"] = [{"svg": Markup(f.svg), "title": f.title, "caption": f.caption,
                              "key": f.key} for f in figs]
            ep["figure_notes"] = notes
    template = html_environment().get_template("report.html")
    return template.render(v=view)
