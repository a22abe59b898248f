"""What a recorded value of each measure may be: one rule per measure, used by the records importer
(``monitor.io.validate``) and written into the offline phone field sheet, so that the check made in the
browser while typing and the check made on import are the same rule from the same place.

Ranges follow the data model (count a whole number >= 0; cover a percent 0-100; frequency and pin hits a
whole k with 0 <= k <= n, n the programme's grid or frame; presence 0 or 1): common practice for
permanent-quadrat records.
"""

from __future__ import annotations

from dataclasses import asdict, dataclass

from monitor import columns as C


@dataclass(frozen=True)
class ValueRule:
    """The range of one measure's value.

    Attributes
    ----------
    minimum, maximum : lowest and highest value allowed (maximum None: no upper bound, or n)
    whole : the value must be a whole number
    up_to_n : the value is k of n (cells or pins) and may not exceed n
    unit : what the value counts, in words
    expected : the importer's wording of the rule ("{n}" stands for the grid or frame size)
    """

    measure: str
    minimum: float
    maximum: float | None
    whole: bool
    up_to_n: bool
    unit: str
    expected: str

    def wording(self, n: int | None = None) -> str:
        return self.expected.replace("{n}", "?" if n is None else str(int(n)))

    def to_dict(self) -> dict:
        return asdict(self)


VALUE_RULES: dict[str, ValueRule] = {
    C.MEASURE_COUNT: ValueRule(C.MEASURE_COUNT, 0, None, True, False, "individuals", "a count: a whole number >= 0"),
    C.MEASURE_COVER: ValueRule(C.MEASURE_COVER, 0, 100, False, False, "percent", "cover in percent, 0 to 100"),
    C.MEASURE_FREQUENCY: ValueRule(C.MEASURE_FREQUENCY, 0, None, True, True, "cells",
                                   "a whole number of cells k with 0 <= k <= n = {n}"),
    C.MEASURE_PIN_HITS: ValueRule(C.MEASURE_PIN_HITS, 0, None, True, True, "pins",
                                  "a whole number of pins k with 0 <= k <= n = {n}"),
    C.MEASURE_PRESENCE: ValueRule(C.MEASURE_PRESENCE, 0, 1, True, False, "0/1", "presence 0 or 1"),
}
assert set(VALUE_RULES) == set(C.MEASURES), "every measure needs its value rule"


def rule(measure: str) -> ValueRule:
    return VALUE_RULES[measure]
