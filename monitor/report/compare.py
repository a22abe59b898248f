"""Comparison with last year's report: what changed in the calls, and why.

The previous report is read from the JSON it wrote (``report.json``, schema
``monitor.report/1``, see ``ReportContext.to_dict``); nothing is refitted.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass

from monitor.report.wording import CALL_LABEL, signed_percent

SCHEMA = "monitor.report/1"


@dataclass(frozen=True)
class CallChange:
    """One species and measure compared with the previous report.

    Attributes
    ----------
    species, species_name, measure : str
    previous_call, current_call : str | None
        None when the species was not in that report.
    changed : bool
        The call differs.
    previous_text, current_text : str
        Annual change with interval as printed, or "—".
    reasons : tuple[str, ...]
        Why the numbers moved, in plain words (new seasons, corrections, model or margin changes).
    """

    species: str
    species_name: str
    measure: str
    previous_call: str | None
    current_call: str | None
    changed: bool
    previous_text: str
    current_text: str
    reasons: tuple[str, ...]

    @property
    def previous_label(self) -> str:
        return CALL_LABEL.get(self.previous_call, "—") if self.previous_call else "not reported"

    @property
    def current_label(self) -> str:
        return CALL_LABEL.get(self.current_call, "—") if self.current_call else "not reported"

    def to_dict(self) -> dict:
        return {
            "species": self.species,
            "measure": self.measure,
            "previous_call": self.previous_call,
            "current_call": self.current_call,
            "changed": self.changed,
            "reasons": list(self.reasons),
        }


def _rate_text(entry: Mapping | None) -> str:
    if not entry or entry.get("annual_change") is None:
        return "—"
    a = entry["annual_change"]
    return (f"{signed_percent(a['estimate'])} ({signed_percent(a['lower']).rstrip('%')} to "
            f"{signed_percent(a['upper']).rstrip('%')})")


def _corrections_for(corrections, species: str) -> int:
    if corrections is None:
        return 0
    if isinstance(corrections, Mapping):
        return int(corrections.get(species, 0))
    return 0


def compare_with_previous(
    current: Sequence[Mapping],
    previous: Mapping,
    *,
    corrections: Mapping[str, int] | int | None = None,
    names: Mapping[str, str] | None = None,
) -> list[CallChange]:
    """Compare this report's summary entries with the previous report's.

    Parameters
    ----------
    current : sequence of mapping
        This report's ``summary`` entries (as in ``ReportContext.to_dict()["summary"]``):
        keys ``species``, ``measure``, ``call``, ``annual_change`` {estimate, lower, upper},
        ``years`` [first, last], ``n_obs``, ``family``, ``margin``.
    previous : mapping
        The previous ``report.json`` (same schema).
    corrections : mapping species -> int, optional
        Corrections to stored records of that species since the previous report
        (from the change log).  A plain int is a programme-wide total, reported
        once by the caller, not per species.
    names : mapping species -> display name, optional

    Returns
    -------
    list of CallChange
        Changed calls first, then unchanged, each in the current order; species dropped since
        last year at the end.
    """
    names = names or {}
    before = {(e["species"], e["measure"]): e for e in previous.get("summary", [])}
    out: list[CallChange] = []
    seen = set()
    for entry in current:
        key = (entry["species"], entry["measure"])
        seen.add(key)
        old = before.get(key)
        reasons: list[str] = []
        if old is None:
            reasons.append("not in last year's report")
        else:
            old_last = int(old["years"][1]) if old.get("years") else None
            new_last = int(entry["years"][1]) if entry.get("years") else None
            if old_last is not None and new_last is not None and new_last > old_last:
                added = ", ".join(str(y) for y in range(old_last + 1, new_last + 1))
                reasons.append(f"new data for {added}")
            if old.get("years") and entry.get("years") and int(old["years"][0]) != int(entry["years"][0]):
                reasons.append(f"series now starts in {int(entry['years'][0])} (was {int(old['years'][0])})")
            n_corr = _corrections_for(corrections, entry["species"])
            if n_corr:
                reasons.append(f"{n_corr} corrected record{'s' if n_corr != 1 else ''} since last year")
            if old.get("family") and entry.get("family") and old["family"] != entry["family"]:
                reasons.append(f"model changed from {old['family']} to {entry['family']}")
            if old.get("margin") is not None and entry.get("margin") is not None and \
                    abs(float(old["margin"]) - float(entry["margin"])) > 1e-12:
                reasons.append(
                    f"margin that matters changed from {float(old['margin']) * 100:g}% to "
                    f"{float(entry['margin']) * 100:g}% a year"
                )
            if not reasons:
                reasons.append("no new data or corrections")
        old_call = old.get("call") if old else None
        changed = old_call != entry.get("call")
        out.append(CallChange(
            species=entry["species"], species_name=names.get(entry["species"], entry["species"]),
            measure=entry["measure"], previous_call=old_call, current_call=entry.get("call"),
            changed=changed, previous_text=_rate_text(old), current_text=_rate_text(entry),
            reasons=tuple(reasons),
        ))
    for key, old in before.items():
        if key not in seen:
            out.append(CallChange(
                species=key[0], species_name=names.get(key[0], key[0]), measure=key[1],
                previous_call=old.get("call"), current_call=None, changed=True,
                previous_text=_rate_text(old), current_text="—",
                reasons=("not in this year's report",),
            ))
    return sorted(out, key=lambda c: not c.changed)
