"""The API documentation (docs/api, Sphinx autodoc + napoleon) builds without a single warning.

The build runs in a child process the way DEVELOPERS.md says (``-W --keep-going``: every warning is an
error, all of them listed), with the HTML builder: code highlighting warns only when pages are written.
"""

import subprocess
import sys
import textwrap
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
CONF = ROOT / "docs" / "api"


def _sphinx(source: Path, out: Path, conf: Path = CONF, cwd: Path = ROOT) -> subprocess.CompletedProcess:
    return subprocess.run(
        [sys.executable, "-m", "sphinx", "-W", "--keep-going", "-q", "-b", "html",
         "-c", str(conf), "-d", str(out / "doctrees"), str(source), str(out / "html")],
        cwd=cwd, capture_output=True, text=True, timeout=600,
    )


def test_api_docs_build_without_warnings(tmp_path):
    result = _sphinx(ROOT / "docs", tmp_path)
    assert result.returncode == 0 and not result.stderr.strip(), (
        "the API docs build warns (fix the docstring; see DEVELOPERS.md, 'Building the API docs'):\n"
        + result.stderr[-6000:]
    )


def test_every_public_module_is_documented():
    """A new module appears in the docs by itself: each page lists its package's modules at build time."""
    sys.path.insert(0, str(CONF / "_ext"))
    try:
        from package_modules import public_modules
    finally:
        sys.path.remove(str(CONF / "_ext"))
    pages = {path.stem for path in CONF.glob("*.rst")}
    packages = {path.parent.name for path in (ROOT / "monitor").glob("*/__init__.py")}
    # command-line and web layers are click commands and routes; their help text is their documentation
    assert packages - {"cli", "web"} <= pages | {"monitor"}, sorted(packages - pages)
    assert "monitor.trend.glmm" in public_modules("monitor.trend")
    assert "monitor.columns" in public_modules("monitor", shallow=True)
    assert not [name for name in public_modules("monitor.io") if "._" in name]


def test_a_broken_docstring_fails_the_build(tmp_path):
    """The check can fail: a docstring docutils cannot read stops the build, named with its module.

    Also checks the References rule of docs/api/conf.py: a reference written with a hanging indent
    becomes one paragraph (docutils alone would read it as a definition list and warn)."""
    package = tmp_path / "src"
    package.mkdir()
    (package / "probe_ok.py").write_text(textwrap.dedent('''\
        """A module.

        References
        ----------
        Author, A. (2001) A long title that runs on
          to a second line. Journal 1, 1-2.
        Author, B. (2002) Another. Journal 2, 3-4.
        """


        def mean_of(values):
            """Mean of values.

            Parameters
            ----------
            values : list of float
                The values [m].

            Returns
            -------
            float
            """
            return sum(values) / len(values)
        '''))
    (package / "probe_bad.py").write_text('"""Flag when |z| exceeds it."""\n')
    docs = tmp_path / "docs"
    (docs / "api").mkdir(parents=True)
    conf = (CONF / "conf.py").read_text()
    conf = conf.replace('sys.path.insert(0, str(HERE / "_ext"))',
                        f'sys.path.insert(0, str(HERE / "_ext"))\nsys.path.insert(0, {str(package)!r})')
    (docs / "api" / "conf.py").write_text(conf)
    (docs / "api" / "_ext").symlink_to(CONF / "_ext")
    (docs / "api" / "index.rst").write_text("Probe\n=====\n\n.. automodule:: probe_ok\n   :members:\n")

    good = _sphinx(docs, tmp_path / "good", conf=docs / "api", cwd=tmp_path)
    assert good.returncode == 0 and not good.stderr.strip(), good.stderr

    (docs / "api" / "index.rst").write_text(
        "Probe\n=====\n\n.. automodule:: probe_ok\n   :members:\n\n.. automodule:: probe_bad\n")
    bad = _sphinx(docs, tmp_path / "bad", conf=docs / "api", cwd=tmp_path)
    assert bad.returncode != 0
    assert "probe_bad" in bad.stderr and 'substitution referenced: "z"' in bad.stderr
