"""A directive that documents every module of a package, so a new module needs no edit here.

``.. package-modules:: monitor.trend`` becomes one section per public module of the package (the
package itself first, then its modules in name order; names starting with ``_`` are internal and left
out), each holding ``automodule`` with its members. ``:shallow:`` lists only the package's direct
modules that are not packages themselves (for the top-level leaf modules).
"""

from __future__ import annotations

import importlib
import pkgutil

from docutils.parsers.rst import directives
from docutils.statemachine import StringList
from sphinx.util.docutils import SphinxDirective
from sphinx.util.parsing import nested_parse_to_nodes


def public_modules(package: str, shallow: bool = False) -> list[str]:
    """Names of the public modules of ``package`` (itself first unless ``shallow``)."""
    module = importlib.import_module(package)
    if shallow:
        found = [info.name for info in pkgutil.iter_modules(module.__path__, package + ".") if not info.ispkg]
        names = []
    else:
        found = [info.name for info in pkgutil.walk_packages(module.__path__, package + ".")]
        names = [package]
    names += sorted(name for name in found if not any(part.startswith("_") for part in name.split(".")))
    return names


class PackageModules(SphinxDirective):
    required_arguments = 1
    option_spec = {"shallow": directives.flag}

    def run(self):
        lines: list[str] = []
        for name in public_modules(self.arguments[0], shallow="shallow" in self.options):
            # the package itself sits under the page's own title (one heading, not the same name twice)
            if name != self.arguments[0]:
                title = f"``{name}``"
                lines += [title, "-" * len(title), ""]
            lines += [f".. automodule:: {name}", "   :members:", "   :ignore-module-all:", ""]
            module = importlib.import_module(name)
            if getattr(module, "__file__", None):
                self.env.note_dependency(module.__file__)
        content = StringList(lines, source=f"package-modules {self.arguments[0]}")
        return nested_parse_to_nodes(self.state, content, allow_section_headings=True)


def setup(app):
    app.add_directive("package-modules", PackageModules)
    return {"parallel_read_safe": True, "parallel_write_safe": True}
