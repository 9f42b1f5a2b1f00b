"""Sphinx configuration for the synthcorona documentation.

Build (warnings are errors, as in CI)::

    python -m sphinx -W --keep-going -b html docs docs/_build/html
"""
import os
import sys

sys.path.insert(0, os.path.abspath(".."))

project = "synthcorona"
author = "the synthcorona developers"
copyright = "2026, the synthcorona developers"

try:
    from importlib.metadata import version as _version

    release = _version("synthcorona")
except Exception:  # pragma: no cover - docs built from a checkout without installing
    release = "0.1.0"
version = release

extensions = [
    "sphinx.ext.autodoc",
    "sphinx.ext.napoleon",
    "sphinx.ext.mathjax",
    "sphinx.ext.viewcode",
    "myst_parser",
]

source_suffix = {".rst": "restructuredtext", ".md": "markdown"}
root_doc = "index"
exclude_patterns = ["_build", "Thumbs.db", ".DS_Store"]

# Building the documentation must never import fiasco (it may try the network on import).
autodoc_mock_imports = ["fiasco", "plasmapy"]
autodoc_member_order = "bysource"
autodoc_default_options = {"show-inheritance": True}

napoleon_numpy_docstring = True
napoleon_google_docstring = False
napoleon_use_rtype = False
napoleon_use_ivar = True  # "Attributes" sections as fields, so properties are not described twice
napoleon_custom_sections = ["Method"]  # used after "Parameters" in several docstrings

myst_enable_extensions = ["dollarmath"]
myst_heading_anchors = 3

nitpicky = False
# Shape names in numpydoc type fields ("(n_bins,) ndarray") are looked up as Python objects; where two
# classes document an attribute of that name the lookup is ambiguous. Those are not links anyone wants.
suppress_warnings = ["ref.python"]

html_theme = "alabaster"
html_title = f"synthcorona {release}"


# A Markdown page added to docs/ without an entry in a toctree of index.md would fail the
# -W build ("document isn't included in any toctree"); list such pages under "More" instead.
def _list_unlisted_pages(app, docname, source):
    """Append a toctree of the top-level docs/*.md pages that index.md does not list."""
    import pathlib
    import re

    if docname != "index":
        return
    listed = set(re.findall(r"^\s*([\w./-]+)\s*$", source[0], re.M))
    here = pathlib.Path(app.srcdir)
    extra = sorted(p.stem for p in here.glob("*.md") if p.stem != "index" and p.stem not in listed)
    if extra:
        source[0] += "\n\n```{toctree}\n:maxdepth: 1\n:caption: More\n\n" + "\n".join(extra) + "\n```\n"


def setup(app):
    """Sphinx hook: register the toctree completion above."""
    app.connect("source-read", _list_unlisted_pages)
    # re-read index.md on every build, so that pages added since the last build are listed
    app.connect("env-get-outdated", lambda app, env, added, changed, removed: ["index"])
