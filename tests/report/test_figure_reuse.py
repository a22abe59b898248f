"""A report written again into its folder reuses the figures whose inputs did not change, and only those.

The check is against drawing afresh: reused files are byte for byte what a new drawing into an empty
folder gives, and a figure is drawn again when what it shows, its resolution, or its file changed.
"""

from __future__ import annotations

import dataclasses
import json

import pytest

from monitor.report import render_report
from monitor.report import render as render_module
from monitor.report.render import FIGURES, MARKER


@pytest.fixture
def counted(monkeypatch):
    """How many figures were drawn (each drawn figure is saved as PNG once)."""
    calls = []
    original = render_module.figure_png

    def figure_png(fig, dpi=130):
        calls.append(dpi)
        return original(fig, dpi)

    monkeypatch.setattr(render_module, "figure_png", figure_png)
    return calls


def _files(folder):
    return {p.name: p.read_bytes() for p in sorted((folder / FIGURES).iterdir())}


def test_figures_are_reused_when_nothing_changed_and_drawn_again_when_something_did(tmp_path, full_context,
                                                                                      counted):
    n_figures = sum(len(s.figures) for s in full_context.species)
    assert n_figures >= 3
    folder = render_report(full_context, tmp_path / "report", dpi=30)
    assert len(counted) == n_figures
    first = _files(folder)
    marker = json.loads((folder / MARKER).read_text())
    assert set(marker["figures"]) == {r.key for s in full_context.species for r in s.figures}

    # the same report again: nothing drawn, the same bytes
    counted.clear()
    render_report(full_context, folder, dpi=30)
    assert counted == []
    assert _files(folder) == first

    # a figure file edited since: that figure alone is drawn again, and comes back as drawn before
    edited = next(iter(marker["figures"]))
    (folder / FIGURES / f"{edited}.png").write_bytes(b"not the figure")
    render_report(full_context, folder, dpi=30)
    assert len(counted) == 1 and _files(folder) == first

    # one species' yearly estimates changed: its index figure alone is drawn again
    counted.clear()
    section = full_context.species[0]
    indices = section.indices.copy()
    indices.loc[indices.index[-1], "index"] = float(indices["index"].iloc[-1]) * 1.5
    changed = dataclasses.replace(full_context, species=(dataclasses.replace(section, indices=indices),
                                                        *full_context.species[1:]))
    render_report(changed, folder, dpi=30)
    assert len(counted) == 1
    index_key = next(r.key for r in section.figures if r.kind == "indices")
    again = _files(folder)
    assert again[f"{index_key}.png"] != first[f"{index_key}.png"]
    assert {k: v for k, v in again.items() if not k.startswith(index_key + ".")} == \
        {k: v for k, v in first.items() if not k.startswith(index_key + ".")}

    # what was reused is what a fresh drawing gives
    fresh = render_report(changed, tmp_path / "fresh", dpi=30)
    assert _files(fresh) == again

    # another resolution: everything is drawn again
    counted.clear()
    render_report(full_context, folder, dpi=31)
    assert len(counted) == n_figures
