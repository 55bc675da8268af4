"""The report's HTML: one self-contained file (inline CSS and SVG) from the Jinja2 templates.

Autoescaping is on for every template, so user text (titles, names, notes) is printed as
text; an undefined value is an error, never an empty cell.
"""

from __future__ import annotations

from functools import lru_cache
from typing import Any

from relayset.resources import templates_dir

TEMPLATE = "report/report.html.j2"
STYLESHEET = "report/report.css"


@lru_cache(maxsize=1)
def _env():
    """One environment per process (a batch worker compiles the template once), with the
    compiled-template cache the console summaries use (compiling this template costs about
    0.1 s; the cache is keyed by the source's checksum, so an edited template recompiles)."""
    import jinja2

    from relayset.report.text import _bytecode_cache, _fingerprint

    env = jinja2.Environment(
        loader=jinja2.FileSystemLoader(str(templates_dir())),
        autoescape=True,
        undefined=jinja2.StrictUndefined,
        trim_blocks=True,
        lstrip_blocks=True,
    )
    env.bytecode_cache = _bytecode_cache(_fingerprint(env))
    return env


def render_html(context: dict[str, Any], study_text: str) -> str:
    """The whole report as HTML text.

    Parameters
    ----------
    context : dict
        From :func:`relayset.report.context.build_context`.
    study_text : str
        The study file's text, echoed in the appendix.
    """
    css = (templates_dir() / STYLESHEET).read_text("utf-8")
    env = _env()
    return env.get_template(TEMPLATE).render(css=css, study_text=study_text, **context)
