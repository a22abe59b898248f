"""The registry of measures: everything that defines a measure, in one place.

A measure is what a quadrat visit records for a species: a count, a percent cover, k of n grid cells
or point-frame pins, presence, or a continuous length.  Each is one :class:`Measure` entry in
:data:`REGISTRY`, holding

- its value columns in a long analysis table (``monitor.columns``) and, for k-of-n measures, the
  column and source (the programme's grid cells or frame pins) of n;
- the rule a recorded value must follow (:class:`ValueRule`), used by the records importer
  (``monitor.io.validate``), the plain-table reader of ``monitor trend --table`` and the offline phone
  field sheet, so the check made in the browser while typing and on import are one rule;
- its unit and wording (a label, a sentence subject, the unit of a season estimate and of a trend level);
- the name of its default model family and the families it may be fitted with (keys of the trend
  engine's family registry), and the key of its single-round estimator (``monitor.estimate``);
- its Darwin Core mapping (occurrence quantity type, measurementType and measurementUnit facts);
- its field-sheet column header, and the database CHECK condition on ``observation`` rows.

Ranges follow the data model (count a whole number >= 0; cover a percent 0-100; frequency and pin hits a
whole k with 0 <= k <= n, n the programme's grid or frame; presence 0 or 1; shoot height a length in cm
above 0): common practice for permanent-quadrat records.

Adding a measure is one entry here, one migration (its row in the ``measure`` table and its CHECK
constraint) and a test; ``tests/test_measures.py`` walks every entry through every stage.  This module is
a leaf: it imports only :mod:`monitor.columns`.
"""

from __future__ import annotations

from dataclasses import asdict, dataclass, field

from monitor import columns as C

# the shapes a measure's values take; each stage handles a kind once, not a measure name
KIND_COUNT = "count"            # whole number >= 0 (Poisson-type models)
KIND_PERCENT = "percent"        # 0-100 (logit-normal)
KIND_K_OF_N = "k_of_n"          # k of n cells or pins (binomial)
KIND_BINARY = "binary"          # 0/1 (binomial with n = 1)
KIND_POSITIVE = "positive"      # a continuous amount > 0 (Gaussian on the log scale)
KINDS = (KIND_COUNT, KIND_PERCENT, KIND_K_OF_N, KIND_BINARY, KIND_POSITIVE)

# single-round estimators (monitor.estimate.season dispatches on these keys)
ESTIMATOR_DENSITY = "density"            # mean count per m^2 and site total (Cochran 1977)
ESTIMATOR_MEAN_COVER = "mean-cover"      # mean percent cover, t interval
ESTIMATOR_PROPORTION = "pooled-proportion"  # ratio estimator of k/n over quadrats
ESTIMATOR_OCCUPANCY = "share-occupied"   # share of quadrats occupied, Wilson interval
ESTIMATOR_GEOMETRIC_MEAN = "geometric-mean"  # mean of log values, t interval back-transformed
ESTIMATORS = (ESTIMATOR_DENSITY, ESTIMATOR_MEAN_COVER, ESTIMATOR_PROPORTION, ESTIMATOR_OCCUPANCY,
              ESTIMATOR_GEOMETRIC_MEAN)


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
    above_minimum : the value must be strictly above ``minimum`` (a length of 0 cm is no plant)
    """

    measure: str
    minimum: float
    maximum: float | None
    whole: bool
    up_to_n: bool
    unit: str
    expected: str
    above_minimum: bool = False

    def wording(self, n: int | None = None) -> str:
        return self.expected.replace("{n}", "?" if n is None else str(int(n)))

    def to_dict(self) -> dict:
        return asdict(self)


@dataclass(frozen=True)
class ColumnRule:
    """What one value column of a plain long table must hold (``monitor trend --table``)."""

    column: str
    minimum: float
    maximum: float | None
    whole: bool
    expected: str
    above_minimum: bool = False


@dataclass(frozen=True)
class DarwinCoreFact:
    """One extended measurement-or-fact row of a record: measurementType, unit and method.

    ``value`` says what the row carries: ``"value"`` the recorded value, ``"n"`` the grid or frame size.
    ``method`` may hold ``{n}``.
    """

    type: str
    unit: str
    method: str
    value: str = "value"


@dataclass(frozen=True)
class Measure:
    """One measure: everything the stages need to know about it (see the module docstring)."""

    code: str
    kind: str
    columns: tuple[str, ...]             # value column first; k-of-n: (k, n)
    rule: ValueRule
    column_rules: tuple[ColumnRule, ...]
    description: str                     # the ``measure`` table's description
    unit: str                            # the ``measure`` table's unit
    label: str                           # inside a sentence: "pin hits"
    subject: str                         # a sentence's subject: "Pin-frame hits on {name}"
    estimate_unit: str                   # unit of the single-round estimate
    quantity: str                        # what the estimate is called in the report's table ("density")
    quantity_label: tuple[str, str]      # its column heading and unit: ("Density", "per m²")
    level_unit: str | None               # unit of a trend level on the data scale (None: counts per quadrat)
    family: str                          # its default model family (a key of the trend engine's families)
    families: tuple[str, ...]            # every model family it may be fitted with
    estimator: str
    sheet_header: str                    # field-sheet column header: "{species}:frequency/{n}"
    check_name: str                      # name of its CHECK constraint on ``observation``
    check: str                           # the CHECK condition on a row of this measure
    dwc_quantity_type: str | None        # occurrence organismQuantityType ("{n}" = grid or frame size)
    dwc_facts: tuple[DarwinCoreFact, ...] = ()
    trials: str | None = None            # k-of-n: what n counts ("cells", "pins")
    trial_source: str | None = None      # k-of-n: where n comes from ("grid", "frame")
    k_words: str | None = None           # k-of-n: what k counts, in words ("cells occupied", "pin hits")
    minutes_per_quadrat: float = 5.0     # default field effort for one species [min], 1 m^2 quadrat
    entry_unit: str | None = None        # unit shown beside an entry field ("%"), if any
    #: the value of a species looked for and not found (0), or None where absence has no value (a shoot
    #: height is measured only on plants present): such a target may be blank on a done visit and is
    #: never filled with 0
    absent_value: float | None = 0.0
    aliases: tuple[str, ...] = field(default=())  # other spellings accepted in a file's measure column

    @property
    def value_column(self) -> str:
        return self.columns[0]

    @property
    def trials_column(self) -> str | None:
        return self.columns[1] if self.kind == KIND_K_OF_N else None

    @property
    def needs_n(self) -> bool:
        return self.kind == KIND_K_OF_N

    def header(self, species: str, n: int | None = None) -> str:
        """The field-sheet column header of this measure for a species."""
        return self.sheet_header.format(species=species, n="" if n is None else int(n))

    def subject_for(self, name: str) -> str:
        return self.subject.format(name=name)


def _k_of_n(code: str, k: str, n: str, trials: str, source: str, *, label: str, subject: str,
            estimate_unit: str, level_unit: str, description: str, dwc: str, k_fact: DarwinCoreFact,
            n_fact: DarwinCoreFact, minutes: float, k_words: str) -> Measure:
    return Measure(
        code=code, kind=KIND_K_OF_N, columns=(k, n),
        rule=ValueRule(code, 0, None, True, True, trials, f"a whole number of {trials} k with 0 <= k <= n = {{n}}"),
        column_rules=(ColumnRule(k, 0, None, True, f"a whole number of {k_words}, 0 or more"),
                      ColumnRule(n, 1, None, True, f"a whole number of {trials}, 1 or more")),
        description=description, unit=trials, label=label, subject=subject, estimate_unit=estimate_unit,
        quantity="frequency", quantity_label=("Frequency", "of " + trials),
        level_unit=level_unit, family="binomial", families=("binomial",), estimator=ESTIMATOR_PROPORTION,
        sheet_header="{species}:" + code + "/{n}", check_name="k_of_n",
        check="(n IS NOT NULL AND n > 0 AND value >= 0 AND value <= n AND value = round(value))",
        dwc_quantity_type=dwc, dwc_facts=(k_fact, n_fact), trials=trials, trial_source=source,
        k_words=k_words, minutes_per_quadrat=minutes)


REGISTRY: dict[str, Measure] = {m.code: m for m in (
    Measure(
        code=C.MEASURE_COUNT, kind=KIND_COUNT, columns=(C.COUNT,),
        rule=ValueRule(C.MEASURE_COUNT, 0, None, True, False, "individuals", "a count: a whole number >= 0"),
        column_rules=(ColumnRule(C.COUNT, 0, None, True, "a whole count of 0 or more"),),
        description="individuals in the quadrat", unit="count", label="count", subject="Numbers of {name}",
        estimate_unit="individuals per m^2", level_unit=None,
        quantity="density", quantity_label=("Density", "per m²"),
        family="poisson-lognormal", families=("poisson", "poisson-lognormal", "negbin"), estimator=ESTIMATOR_DENSITY,
        sheet_header="{species}:count", check_name="count_whole", check="(value >= 0 AND value = round(value))",
        dwc_quantity_type="individuals", minutes_per_quadrat=8.0),
    Measure(
        code=C.MEASURE_COVER, kind=KIND_PERCENT, columns=(C.COVER,),
        rule=ValueRule(C.MEASURE_COVER, 0, 100, False, False, "percent", "cover in percent, 0 to 100"),
        column_rules=(ColumnRule(C.COVER, 0, 100, False, "a cover between 0 and 100 (%)"),),
        description="percent of quadrat area covered", unit="%", label="cover", subject="Cover of {name}",
        estimate_unit="% cover", level_unit="% cover",
        quantity="cover", quantity_label=("Mean cover", "%"), family="logit-normal", families=("logit-normal",), estimator=ESTIMATOR_MEAN_COVER,
        sheet_header="{species}:cover", check_name="cover_percent", check="(value >= 0 AND value <= 100)",
        dwc_quantity_type="% cover",
        dwc_facts=(DarwinCoreFact("cover", "%", "visual estimate of the percent of quadrat area covered"),),
        minutes_per_quadrat=4.0, entry_unit="%"),
    _k_of_n(C.MEASURE_FREQUENCY, C.OCCUPIED, C.CELLS, "cells", "grid", label="frequency",
            subject="Frequency of {name} (share of grid cells occupied)",
            estimate_unit="share of grid cells occupied", level_unit="% of cells occupied",
            description="grid cells occupied (k of n)", dwc="cells occupied of {n}",
            k_fact=DarwinCoreFact("occupied grid cells", "cells", "cells of a {n}-cell grid in which the species is rooted"),
            n_fact=DarwinCoreFact("grid cells", "cells", "cells in the quadrat grid", value="n"),
            minutes=10.0, k_words="occupied cells"),
    _k_of_n(C.MEASURE_PIN_HITS, C.HITS, C.PINS, "pins", "frame", label="pin hits",
            subject="Pin-frame hits on {name}", estimate_unit="share of pins hit", level_unit="% of pins hitting",
            description="point-frame pins touching (k of n)", dwc="pins touching of {n}",
            k_fact=DarwinCoreFact("pins touching", "pins", "pins of a {n}-pin point frame touching the species"),
            n_fact=DarwinCoreFact("pins in frame", "pins", "pins in the point frame", value="n"),
            minutes=6.0, k_words="pin hits"),
    Measure(
        code=C.MEASURE_PRESENCE, kind=KIND_BINARY, columns=(C.PRESENT,),
        rule=ValueRule(C.MEASURE_PRESENCE, 0, 1, True, False, "0/1", "presence 0 or 1"),
        column_rules=(ColumnRule(C.PRESENT, 0, 1, True, "0 (absent) or 1 (present)"),),
        description="present (1) or absent (0)", unit="0/1", label="presence",
        subject="The share of stations holding {name}", estimate_unit="share of quadrats occupied",
        level_unit="% of stations occupied",
        quantity="presence", quantity_label=("Stations occupied", "share"), family="binomial", families=("binomial",), estimator=ESTIMATOR_OCCUPANCY,
        sheet_header="{species}:presence", check_name="presence_binary", check="value IN (0, 1)",
        dwc_quantity_type=None, minutes_per_quadrat=1.0),
    Measure(
        code=C.MEASURE_SHOOT_HEIGHT, kind=KIND_POSITIVE, columns=(C.HEIGHT,),
        rule=ValueRule(C.MEASURE_SHOOT_HEIGHT, 0, None, False, False, "cm", "a shoot height in cm, above 0",
                       above_minimum=True),
        column_rules=(ColumnRule(C.HEIGHT, 0, None, False, "a shoot height in cm, above 0", above_minimum=True),),
        description="mean shoot height in the quadrat", unit="cm", label="shoot height",
        subject="Shoot height of {name}", estimate_unit="cm (geometric mean)", level_unit="cm",
        quantity="height", quantity_label=("Shoot height", "cm"), family="lognormal", families=("lognormal",),
        estimator=ESTIMATOR_GEOMETRIC_MEAN, sheet_header="{species}:shoot_height", check_name="height_positive",
        check="(value > 0 AND n IS NULL)", dwc_quantity_type=None,
        dwc_facts=(DarwinCoreFact("shoot height", "cm",
                                  "mean height of the species' shoots in the quadrat, ground to tip"),),
        minutes_per_quadrat=3.0, entry_unit="cm", absent_value=None),
)}


def get(code: str) -> Measure:
    """The registry entry of a measure code; KeyError names the known codes."""
    try:
        return REGISTRY[code]
    except KeyError:
        raise KeyError(f"unknown measure {code!r}; expected one of {', '.join(REGISTRY)}") from None


def codes() -> tuple[str, ...]:
    return tuple(REGISTRY)


def of_kind(*kinds: str) -> tuple[str, ...]:
    """The codes of the measures of these kinds, in registry order."""
    return tuple(code for code, m in REGISTRY.items() if m.kind in kinds)


def k_of_n_codes() -> tuple[str, ...]:
    return of_kind(KIND_K_OF_N)


def by_columns() -> list[tuple[tuple[str, ...], str]]:
    """(value columns, code), most columns first: how a plain table's columns name its measure."""
    return sorted(((m.columns, code) for code, m in REGISTRY.items()), key=lambda item: -len(item[0]))


def zero_when_absent(code: str) -> bool:
    """A target of this measure left blank on a done visit is a missing value (or, where blanks mean zero,
    a 0), rather than a measure that has no value when the species is absent."""
    entry = REGISTRY.get(code)
    return entry is None or entry.absent_value is not None


def _sql_list(values) -> str:
    return ", ".join(f"'{v}'" for v in values)


def observation_checks() -> list[tuple[str, str]]:
    """The CHECK constraints of ``observation``: (name, SQL), one per measure (k-of-n measures share one)."""
    out: list[tuple[str, str]] = []
    seen: set[str] = set()
    for m in REGISTRY.values():
        if m.check_name in seen:
            continue
        seen.add(m.check_name)
        group = [c for c, other in REGISTRY.items() if other.check_name == m.check_name]
        test = f"measure <> '{group[0]}'" if len(group) == 1 else f"measure NOT IN ({_sql_list(group)})"
        out.append((m.check_name, f"{test} OR {m.check}"))
    out.append(("n_only_for_k_of_n", f"measure IN ({_sql_list(k_of_n_codes())}) OR n IS NULL"))
    return out


def target_n_check() -> str:
    """The CHECK on ``target``: n is given for k-of-n measures and only for them."""
    kn = _sql_list(k_of_n_codes())
    return f"(measure IN ({kn}) AND n IS NOT NULL AND n > 0) OR (measure NOT IN ({kn}) AND n IS NULL)"


def measure_rows() -> tuple[dict, ...]:
    """The rows of the ``measure`` table."""
    return tuple({"code": m.code, "description": m.description, "unit": m.unit, "needs_n": m.needs_n}
                 for m in REGISTRY.values())


#: the importer's and phone sheet's rule of each measure
VALUE_RULES: dict[str, ValueRule] = {code: m.rule for code, m in REGISTRY.items()}


def rule(measure: str) -> ValueRule:
    return VALUE_RULES[measure]
