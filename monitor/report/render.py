"""Render a ``ReportContext`` into a folder: index.html, figures (PNG, SVG) and report.json.

The HTML page is self-contained: styles inline, figures embedded as base64
``data:`` URIs, and a Content-Security-Policy that forbids every load except
``data:`` images, so the file can be e-mailed and opened offline and makes no
network request.  Templates live in ``templates/report/`` (Jinja2, autoescape,
StrictUndefined): a base page plus one partial per section.

The folder is written into a temporary sibling and moved into place at the end,
so a reader never sees a half-written report.  Nothing the tool did not write is ever deleted: every
report folder carries a marker file (``.monitor-report``) listing the files written, an existing folder
is replaced only when it is empty or one of our reports, and files a user added to a report folder stay.
A non-empty folder without the marker is refused (a report written before the marker existed, holding
only ``index.html``, ``report.json`` and ``figures/*.png|svg``, counts as ours).
"""

from __future__ import annotations

import json
import os
import shutil
import tempfile
from collections.abc import Callable
from dataclasses import dataclass
from pathlib import Path

import jinja2

from monitor.errors import InputError, InputProblem, MonitorError
from monitor.report import reuse
from monitor.report.context import FigureRef, ReportContext, SpeciesSection
from monitor.report.figures import (
    data_uri,
    figure_png,
    figure_svg,
    plot_gradient,
    plot_indices,
    plot_station_map,
)
from monitor.report.wording import MEASURE_LABEL

INDEX = "index.html"
PDF = "report.pdf"
NUMBERS = "report.json"
FIGURES = "figures"
MARKER = ".monitor-report"
CSP = "default-src 'none'; img-src data:; style-src 'unsafe-inline'; base-uri 'none'; form-action 'none'"


def template_dir() -> Path:
    """The templates folder: bundled in an installed wheel, or ``templates/`` of a checkout."""
    package = Path(__file__).resolve().parent.parent
    for candidate in (package / "_bundled" / "templates", package.parent / "templates"):
        if (candidate / "report" / "index.html").is_file():
            return candidate
    raise MonitorError("report templates not found (expected templates/report/index.html)")


def environment(directory: Path | None = None) -> jinja2.Environment:
    """Jinja2 environment for report pages: autoescape on, undefined names are errors."""
    return jinja2.Environment(
        loader=jinja2.FileSystemLoader(str(directory or template_dir())),
        autoescape=True,
        undefined=jinja2.StrictUndefined,
        trim_blocks=True,
        lstrip_blocks=True,
        keep_trailing_newline=True,
    )


@dataclass(frozen=True)
class DrawnFigure:
    """A drawn figure: its reference, PNG bytes and SVG bytes (None when SVG is not wanted).

    ``digest`` identifies what was drawn and how (``monitor.report.reuse``; None: not identifiable);
    ``reused`` says the bytes come from the report this one replaces.
    """

    ref: FigureRef
    png: bytes
    svg: bytes | None
    digest: str | None = None
    reused: bool = False


def figure_call(section: SpeciesSection, ref: FigureRef, context: ReportContext) -> tuple[Callable, tuple, dict]:
    """What draws one figure of a species section: the plotting function and its arguments."""
    s = section.summary
    if ref.kind == "indices":
        label = MEASURE_LABEL.get(s.measure, s.measure)
        if section.value_label:   # yearly estimates and trend on the measure's own scale
            return plot_indices, (section.indices, section.fitted_trend), {
                "marks": section.marks, "ylabel": section.value_label[0].upper() + section.value_label[1:],
                "reference": None}
        return plot_indices, (section.indices, section.fitted_trend), {
            "marks": section.marks, "ylabel": f"Index of {label} ({s.first_year} = 1)"}
    if ref.kind == "map":
        return plot_station_map, (section.stations, section.station_changes, context.sites), {}
    if ref.kind == "gradient":
        g = section.gradient
        return plot_gradient, (g.frame,), {"gradient_label": g.gradient_label, "value_label": g.value_label}
    raise ValueError(f"unknown figure kind {ref.kind!r}")


def draw_figure(section: SpeciesSection, ref: FigureRef, context: ReportContext):
    """Draw one figure of a species section and return the matplotlib Figure."""
    function, args, kwargs = figure_call(section, ref, context)
    return function(*args, **kwargs)


def draw_figures(context: ReportContext, *, dpi: int = 130, svg: bool = True,
                 progress: Callable[[int, int], None] | None = None,
                 previous: dict[str, tuple[str, bytes, bytes | None]] | None = None) -> list[DrawnFigure]:
    """Draw every figure in the context (PNG, and SVG unless ``svg=False``).

    ``previous`` holds the figures of the report being replaced (``reuse.reusable``): a figure whose
    digest equals the one recorded for its key is taken from there instead of drawn again.
    """
    refs = [(section, ref) for section in context.species for ref in section.figures]
    out = []
    for done, (section, ref) in enumerate(refs, start=1):
        function, args, kwargs = figure_call(section, ref, context)
        digest = reuse.digest(function, args, kwargs, dpi=dpi, svg=svg)
        earlier = (previous or {}).get(ref.key)
        if digest is not None and earlier is not None and earlier[0] == digest:
            out.append(DrawnFigure(ref, earlier[1], earlier[2], digest, reused=True))
            if progress is not None:
                progress(done, len(refs))
            continue
        fig = function(*args, **kwargs)
        png = figure_png(fig, dpi)
        # the layout is settled by the first save; keep it rather than solving it again for the SVG.  No engine
        # at all (not "none", a placeholder engine): with any engine, saving draws the figure twice, once only
        # to lay it out (the SVG is byte for byte the same either way)
        fig.set_layout_engine(None)
        out.append(DrawnFigure(ref, png, figure_svg(fig) if svg else None, digest))
        del fig
        if progress is not None:
            progress(done, len(refs))
    return out


def render_html(context: ReportContext, images: dict[str, str], directory: Path | None = None) -> str:
    """The report page as a string; ``images`` maps figure keys to data URIs."""
    env = environment(directory)
    return env.get_template("report/index.html").render(report=context, images=images, csp=CSP,
                                                        measure_labels=MEASURE_LABEL)


def write_pdf(html: str, path: Path) -> Path:
    """The printed report: the page's print stylesheet laid out on A4 by WeasyPrint (page numbers,
    captions kept with their tables, one species to a sheet), written to ``path``.

    WeasyPrint fetches nothing: the page holds its figures as data URIs, and any other URL is refused.
    """
    import logging

    import weasyprint

    logging.getLogger("weasyprint").setLevel(logging.ERROR)  # its notes on unsupported CSS are not ours
    fetcher = weasyprint.URLFetcher(allowed_protocols=["data"])
    weasyprint.HTML(string=html, url_fetcher=fetcher).write_pdf(path)
    return path


def render_report(context: ReportContext, out_dir: str | os.PathLike, *, dpi: int = 130, svg: bool = True,
                  templates: Path | None = None,
                  progress: Callable[[int, int], None] | None = None, pdf: bool = False) -> Path:
    """Write the report folder and return its path.

    Parameters
    ----------
    context : ReportContext
        From ``build_report_context``.
    out_dir : path
        The folder to write; replaced as a whole if it exists.
    dpi : int
        Resolution of the PNG figures (embedded and written).
    svg : bool
        Also write each figure as SVG.
    templates : Path, optional
        A templates folder holding ``report/``; default: the project's.
    progress : callable(done, total), optional
        Called after each figure.
    pdf : bool
        Also write ``report.pdf``, the printed report (WeasyPrint).

    Returns
    -------
    Path
        ``out_dir``, holding ``index.html``, ``report.json`` and ``figures/``
        (``<key>.png`` and ``<key>.svg``).
    """
    out_dir = Path(out_dir).resolve()
    ours = report_files_in(out_dir)
    out_dir.parent.mkdir(parents=True, exist_ok=True)
    tmp = Path(tempfile.mkdtemp(prefix=f".{out_dir.name}.", suffix=".partial", dir=out_dir.parent))
    try:
        figures_dir = tmp / FIGURES
        figures_dir.mkdir()
        images: dict[str, str] = {}
        recorded: dict[str, dict] = {}
        previous = reuse.reusable(out_dir, MARKER, FIGURES) if ours is not None else {}
        for drawn in draw_figures(context, dpi=dpi, svg=svg, progress=progress, previous=previous):
            (figures_dir / f"{drawn.ref.key}.png").write_bytes(drawn.png)
            if drawn.svg is not None:
                (figures_dir / f"{drawn.ref.key}.svg").write_bytes(drawn.svg)
            images[drawn.ref.key] = data_uri(drawn.png)
            if drawn.digest is not None:
                recorded[drawn.ref.key] = reuse.record(drawn.digest, drawn.png, drawn.svg)
        html = render_html(context, images, templates)
        (tmp / INDEX).write_text(html, encoding="utf-8")
        if pdf:
            write_pdf(html, tmp / PDF)
        numbers = json.dumps(context.to_dict(), indent=2, ensure_ascii=False, allow_nan=False)
        (tmp / NUMBERS).write_text(numbers + "\n", encoding="utf-8")
        written = sorted(str(p.relative_to(tmp).as_posix()) for p in tmp.rglob("*") if p.is_file())
        (tmp / MARKER).write_text(json.dumps({"written_by": "monitor report", "files": written,
                                              "figures": recorded}, indent=1) + "\n", encoding="utf-8")
        os.chmod(tmp, 0o755)
        if ours is None or _only(out_dir, ours):
            _swap_into_place(tmp, out_dir)
        else:
            _replace_ours(tmp, out_dir, ours)
            shutil.rmtree(tmp, ignore_errors=True)
    except BaseException:
        shutil.rmtree(tmp, ignore_errors=True)
        raise
    return out_dir


_LEGACY_TOP = {INDEX, NUMBERS, FIGURES}


def report_files_in(folder: Path) -> set[str] | None:
    """The files of an earlier report of ours in ``folder`` (relative paths), None if it is absent or empty.

    Raises InputError for a folder holding anything else: we never delete what we did not write.
    """
    folder = Path(folder)
    if not folder.exists():
        return None
    if not folder.is_dir():
        raise InputError(InputProblem(str(folder), None, "--out", None,
                                      "a folder for the report; this is a file, and it is left as it is"))
    entries = list(folder.iterdir())
    if not entries:
        return None
    marker = folder / MARKER
    if marker.is_file():
        try:
            files = json.loads(marker.read_text(encoding="utf-8")).get("files", [])
        except (OSError, ValueError, AttributeError):
            files = None
        if isinstance(files, list) and all(isinstance(f, str) and ".." not in Path(f).parts for f in files):
            return {*files, MARKER}
    names = {e.name for e in entries}
    figures = folder / FIGURES
    if names <= _LEGACY_TOP and all(e.is_file() for e in entries if e.name != FIGURES) and (
            not figures.exists() or (figures.is_dir() and all(f.is_file() and f.suffix in (".png", ".svg")
                                                                for f in figures.iterdir()))):
        return {str(p.relative_to(folder).as_posix()) for p in folder.rglob("*") if p.is_file()}
    foreign = sorted(names - _LEGACY_TOP)[:3] or sorted(names)[:3]
    raise InputError(InputProblem(str(folder), None, "--out", None,
                                  "a new or empty folder, or the folder of an earlier report: this folder holds "
                                  f"files monitor did not write ({', '.join(foreign)}"
                                  f"{', ...' if len(names) > 3 else ''}), and nothing in it is deleted"))


def _only(folder: Path, ours: set[str]) -> bool:
    """True when ``folder`` holds nothing but the files of our earlier report (and their folders)."""
    return all(str(p.relative_to(folder).as_posix()) in ours for p in folder.rglob("*") if not p.is_dir())


def _replace_ours(tmp: Path, target: Path, ours: set[str]) -> None:
    """Replace our earlier report's files in ``target`` by the new ones, keeping every file a user added."""
    new = {str(p.relative_to(tmp).as_posix()) for p in tmp.rglob("*") if p.is_file()}
    for name in sorted(ours - new):
        path = target / name
        if path.is_file():
            path.unlink()
    for name in sorted(new):
        destination = target / name
        destination.parent.mkdir(parents=True, exist_ok=True)
        os.replace(tmp / name, destination)


def _swap_into_place(tmp: Path, target: Path) -> None:
    """Move ``tmp`` to ``target``; an existing ``target`` is moved aside first, then removed.

    Each step is one ``rename`` on the same file system, so ``target`` is always either the
    old complete report or the new one (absent only between the two renames).
    """
    if not target.exists():
        os.replace(tmp, target)
        return
    old = Path(tempfile.mkdtemp(prefix=f".{target.name}.", suffix=".old", dir=target.parent))
    os.rmdir(old)
    os.replace(target, old)
    try:
        os.replace(tmp, target)
    except BaseException:
        os.replace(old, target)
        raise
    shutil.rmtree(old, ignore_errors=True)
