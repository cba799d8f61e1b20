"""The one templating path for every HTML report (report.html of a batch run, sweep_report.html of a sweep).

Jinja2 templates ship as package data in solver/templates/; all of them extend _page.html.j2, which carries the
style and the caution at the top and the bottom of every report. Autoescaping is on, so a scenario name or a
station name is shown as text, never read as markup.
"""
from __future__ import annotations

import math
from functools import lru_cache
from typing import Any


def number(value: Any, digits: int = 5) -> str:
    """A figure for a table: floats to `digits` significant digits ("-" when not finite), others as text."""
    if isinstance(value, float):
        return f"{value:.{digits}g}" if math.isfinite(value) else "-"
    return "" if value is None else str(value)


@lru_cache(maxsize=1)
def environment():
    import jinja2

    env = jinja2.Environment(loader=jinja2.PackageLoader("shockslate.solver", "templates"),
                             autoescape=True, undefined=jinja2.StrictUndefined, trim_blocks=True,
                             lstrip_blocks=True, keep_trailing_newline=True)
    env.filters["number"] = number
    return env


def render(template: str, **context: Any) -> str:
    """The named template of solver/templates/ rendered with the context."""
    return environment().get_template(template).render(**context)
