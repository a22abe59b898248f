"""monitor.report: the annual report for land managers.

Pure: no database, no click, no fitting.  The service layer gathers fitted
trends, this season's estimates, coverage, triggers and events, and calls

    context = build_report_context(programme_meta, season, trend_results, ...)
    folder = render_report(context, out_dir)

``context`` is the report's whole content as documented dataclasses (numbers
formatted, sentences written, figures described); ``render_report`` draws the
figures and writes a self-contained ``index.html``, the figures as PNG and SVG,
and ``report.json`` with the numbers.
"""

from monitor.report.compare import CallChange, compare_with_previous
from monitor.report.context import (
    Coverage,
    CoverageRow,
    EstimateRow,
    FigureRef,
    GradientData,
    Interval,
    Methods,
    Photo,
    PowerRow,
    ProgrammeInfo,
    QualityFlag,
    ReportContext,
    SeasonsRow,
    SpeciesSection,
    StationPhotos,
    SummaryRow,
    build_report_context,
    software_versions,
)
from monitor.report.figures import (
    EventMark,
    figure_png,
    figure_svg,
    plot_gradient,
    plot_indices,
    plot_station_map,
)
from monitor.report.render import draw_figures, environment, render_html, render_report, template_dir
from monitor.report.triggers import Trigger, TriggerOutcome, evaluate_trigger, evaluate_triggers
from monitor.report.wording import (
    MethodChange,
    TrendNumbers,
    caveat_sentences,
    period_phrase,
    share_words,
    trend_sentence,
)

__all__ = [
    "CallChange", "Coverage", "CoverageRow", "EstimateRow", "EventMark", "FigureRef", "GradientData",
    "Interval", "Methods", "MethodChange", "Photo", "PowerRow", "StationPhotos", "ProgrammeInfo", "QualityFlag", "ReportContext",
    "SeasonsRow", "SpeciesSection", "SummaryRow", "Trigger", "TriggerOutcome", "TrendNumbers",
    "build_report_context", "caveat_sentences", "compare_with_previous", "draw_figures", "environment",
    "evaluate_trigger", "evaluate_triggers", "figure_png", "figure_svg", "period_phrase", "plot_gradient",
    "plot_indices", "plot_station_map", "render_html", "render_report", "share_words", "software_versions",
    "template_dir", "trend_sentence",
]
