"""Sphinx configuration of the API documentation (``docs/api``).

The source is the whole ``docs/`` folder (the Markdown pages there are part of the build, so their
links are checked); this folder holds the configuration and the API pages. Build (DEVELOPERS.md)::

    python -m sphinx -W --keep-going -c docs/api -b html docs build/docs

``tests/test_docs.py`` builds it the same way and fails on any warning.
"""

import sys
from pathlib import Path

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE.parents[1]))  # the checkout, so `monitor` imports without installing
sys.path.insert(0, str(HERE / "_ext"))

project = "monitor"
author = "monitor contributors"
copyright = "monitor contributors"

extensions = [
    "sphinx.ext.autodoc",
    "sphinx.ext.napoleon",  # numpydoc-style sections (Parameters, Returns, Notes, References)
    "sphinx.ext.mathjax",
    "myst_parser",  # the Markdown pages under docs/ (files.md, tutorial.md)
    "package_modules",
]

# numpydoc style only; the stage modules write Parameters/Returns/Notes/References
napoleon_google_docstring = False
napoleon_numpy_docstring = True
napoleon_use_ivar = True  # an "Attributes" section and the dataclass fields would otherwise clash
autodoc_member_order = "bysource"
autodoc_typehints = "description"  # signatures stay short; numpydoc types win where given
autodoc_default_options = {"show-inheritance": True}

source_suffix = {".rst": "restructuredtext", ".md": "markdown"}
root_doc = "api/index"
exclude_patterns = ["api/_ext"]
# tutorial.md marks its code blocks `console` and `csv file=NAME` (run by tests/test_tutorial.py; the
# csv lexer is registered in setup() below)
myst_heading_anchors = 3

html_theme = "alabaster"
html_static_path: list[str] = []


def _references_as_paragraphs(app, what, name, obj, options, lines):
    """Make each entry of a "References" section one paragraph.

    The docstrings write references as plain text with a hanging indent for continuation lines
    (readable in ``help()``); reStructuredText would read the indent as a definition list. This joins
    each reference's lines and puts a blank line between references, before napoleon reads the section.
    """
    out: list[str] = []
    inside = False
    for index, line in enumerate(lines):
        header = index + 1 < len(lines) and set(lines[index + 1].strip()) == {"-"} and line.strip()
        if header:
            inside = line.strip() == "References"
            out.append(line)
            continue
        if inside and set(line.strip()) != {"-"}:
            if line[:1].isspace() and line.strip() and out and out[-1].strip():
                out[-1] = out[-1].rstrip() + " " + line.strip()
                continue
            if line.strip() and out and out[-1].strip() and set(out[-1].strip()) != {"-"}:
                out.append("")
        out.append(line)
    lines[:] = out


def setup(app):
    from pygments.lexers.special import TextLexer

    app.connect("autodoc-process-docstring", _references_as_paragraphs, priority=400)
    # tutorial.md's ```csv file=NAME blocks (Pygments has no CSV lexer): shown as plain text
    app.add_lexer("csv", TextLexer)
