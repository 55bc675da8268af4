"""Write the API reference (HTML) from the docstrings, with pdoc.

Usage: ``python docs/make_reference.py [OUT]`` (default ``docs/_build/reference``; needs the
``docs`` or ``test`` extra: ``pip install -e ".[docs]"``). Open ``OUT/index.html``.

The reference covers the public API (:mod:`relayset.api`, :mod:`relayset.frames`), the
results model (:mod:`relayset.results`), the errors, and the pure physics
(:mod:`relayset.physics`). The docstrings are numpydoc; pdoc renders their math.
"""

from __future__ import annotations

import sys
from pathlib import Path

#: What the reference documents: the package page and these modules (packages with their
#: submodules). The command line, input parsing, rendering and orchestration are internal.
MODULES = ["relayset", "relayset.api", "relayset.frames", "relayset.errors",
           "relayset.results", "relayset.physics"]


def build(out: str | Path) -> Path:
    """Write the reference into ``out``; return the path of its index page."""
    import pdoc
    import pdoc.render

    root = Path(__file__).resolve().parents[1]
    if str(root) not in sys.path:
        sys.path.insert(0, str(root))  # the working tree's relayset, not an installed copy
    import importlib

    for name in ("relayset", "relayset.results"):
        # Their public names are imported on first use (a fast start); pdoc reads the
        # module's namespace, so import them now.
        mod = importlib.import_module(name)
        for attr in mod.__all__:
            setattr(mod, attr, getattr(mod, attr))
    pdoc.render.configure(docformat="numpy", math=True, show_source=False,
                          footer_text="relayset API reference")
    out = Path(out)
    pdoc.pdoc(*MODULES,
              output_directory=out)
    return out / "index.html"


if __name__ == "__main__":
    target = sys.argv[1] if len(sys.argv) > 1 else Path(__file__).parent / "_build" / "reference"
    print(build(target))
