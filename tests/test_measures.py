"""The registry of measures (monitor/measures.py), and every measure walked through every stage.

The walk builds, for each registry entry, a small programme with one species recorded by that measure
(the invented demo reserve's sites, stations and windows), writes six seasons of field sheets with the
measure's own column header from values simulated by the power stage's population model for the
measure's default family, and then runs the services a user runs: import, this season's estimates,
trend, power, report and Darwin Core export.  A measure added to the registry without its part in one
stage fails here with the measure and the stage named.

The data are invented (simulated; no real records).  The checks are what each stage must hand on for
any measure (a finite estimate inside its interval, the registry's family and units, the registry's
Darwin Core terms); the numbers themselves are checked against outside sources in each stage's own tests.
"""

from __future__ import annotations

import contextlib
import csv
import dataclasses
import datetime as dt
import json
import math
import shutil
import zipfile
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from monitor import columns as C
from monitor import measures
from tests.conftest import REPO_ROOT

DEMO = REPO_ROOT / "demo_programme"
SPECIES = "TESTSP"
YEARS = list(range(2015, 2021))   # six seasons: above the trend call's minimum of five
#: a typical first-year level of each default family, on the data scale (count per quadrat, share, cm);
#: a new family needs a line here (invented, for simulation only)
TYPICAL_LEVEL = {"poisson-lognormal": 6.0, "poisson": 6.0, "negbin": 6.0, "binomial": 0.4, "logit-normal": 0.2,
                 "lognormal": 20.0}


@contextlib.contextmanager
def stage(code: str, name: str):
    """Name the measure and the stage in any failure inside."""
    try:
        yield
    except Exception as exc:  # noqa: BLE001 - re-raised as a failure that names where it happened
        pytest.fail(f"measure {code!r}, stage {name!r}: {type(exc).__name__}: {exc}", pytrace=True)


# --- the registry on its own -------------------------------------------------------------------------------
@pytest.mark.parametrize("code", measures.codes())
def test_registry_entry_is_complete(code):
    m = measures.REGISTRY[code]
    assert m.code == code == m.rule.measure
    assert m.kind in measures.KINDS
    assert m.estimator in measures.ESTIMATORS
    assert m.family in m.families
    assert len(set(m.columns)) == len(m.columns) >= 1
    assert {r.column for r in m.column_rules} == set(m.columns)
    assert (m.trials_column is not None) == m.needs_n == m.rule.up_to_n == (m.kind == measures.KIND_K_OF_N)
    if m.needs_n:
        assert m.trials and m.trial_source and "{n}" in m.sheet_header
    assert "{name}" in m.subject
    assert f"'{code}'" in dict(measures.observation_checks())[m.check_name]


@pytest.mark.parametrize("code", measures.codes())
def test_sheet_header_reads_back(code):
    """The field-sheet header the registry writes is the one the importer reads (io/records.py)."""
    from monitor.io._tables import _is_wide_header
    from monitor.io.records import parse_value_header

    m = measures.REGISTRY[code]
    n = 25 if m.needs_n else None
    header = m.header(SPECIES, n)
    assert _is_wide_header(header)
    assert parse_value_header(header) == (SPECIES, code, n)


def test_columns_glossary_follows_the_registry():
    assert C.MEASURES == measures.codes()
    assert C.MEASURE_COLUMNS == {code: m.columns for code, m in measures.REGISTRY.items()}
    assert [c for c, _ in measures.by_columns()][0] in [m.columns for m in measures.REGISTRY.values()]


@pytest.mark.parametrize("code", measures.codes())
def test_a_plain_tables_columns_name_its_measure(code):
    """``monitor trend --table``: the value columns of a table say which measure it holds (k of n before
    the single columns, so occupied+cells is frequency)."""
    columns = {C.STATION, C.YEAR, *measures.REGISTRY[code].columns}
    assert [m for cols, m in measures.by_columns() if set(cols) <= columns][0] == code


def test_registry_is_a_leaf():
    """monitor.measures imports nothing of the project but the column glossary."""
    import ast

    tree = ast.parse((REPO_ROOT / "monitor" / "measures.py").read_text())
    imported = {node.module for node in ast.walk(tree) if isinstance(node, ast.ImportFrom) and node.module}
    imported |= {a.name for node in ast.walk(tree) if isinstance(node, ast.Import) for a in node.names}
    assert {name for name in imported if name.startswith("monitor")} == {"monitor"}  # from monitor import columns


def test_value_rule_wording_and_strict_minimum():
    frequency = measures.rule(C.MEASURE_FREQUENCY)
    assert frequency.wording(25) == "a whole number of cells k with 0 <= k <= n = 25"
    strict = [m for m in measures.REGISTRY.values() if m.rule.above_minimum]
    for m in strict:
        assert m.rule.minimum == 0


# --- the walk ------------------------------------------------------------------------------------------------
def _programme_folder(tmp_path: Path, m: measures.Measure) -> tuple[Path, list[str], int | None]:
    folder = tmp_path / f"programme_{m.code}"
    folder.mkdir()
    for name in ("sites.geojson", "stations.csv", "panels.csv", "windows.csv", "observers.csv"):
        shutil.copy(DEMO / name, folder / name)
    settings = json.loads((DEMO / "programme.json").read_text())
    settings["settings"].pop("triggers", None)
    settings["settings"]["minutes_per_quadrat"] = {m.code: m.minutes_per_quadrat}
    settings.pop("protocols", None)
    (folder / "programme.json").write_text(json.dumps(settings))
    n = (25 if m.trials == "cells" else 10) if m.needs_n else None
    with open(folder / "species.csv", "w", newline="") as f:
        w = csv.writer(f)
        w.writerow(["code", "scientific_name", "common_name", "measure", "n", "sensitive"])
        w.writerow([SPECIES, "Testaria registrata (invented)", "registry testwort", m.code, "" if n is None else n,
                    "no"])
    stations = pd.read_csv(DEMO / "stations.csv", dtype=str)
    # twelve stations visited every year (above the trend call's minimum of ten)
    annual = stations[(stations["panel"] == "ANNUAL") & stations["retired"].isna()]["code"].tolist()[::2][:12]
    return folder, annual, n


def _simulated(m: measures.Measure, n_stations: int, trials: int | None) -> pd.DataFrame:
    """Six seasons of the measure's columns from the power stage's model of its default family."""
    from monitor.power import Design, Scenario, VarianceComponents, simulate_dataset

    from monitor.families import family as family_of

    family = m.family
    fam = family_of(family)   # its dispersion and observation effect, from the family registry
    extra = {}
    if fam.has_dispersion:
        extra[fam.dispersion_field] = 5.0 if fam.dispersion_field == "theta" else 0.3
    if fam.observation_effect == "always":
        extra["observation_sd"] = 0.2
    if m.needs_n:
        extra["trials"] = trials
    components = VarianceComponents.from_mean(family, TYPICAL_LEVEL[family], station_sd=0.4, site_sd=0.2,
                                              year_sd=0.1, measure=m.code, **extra)
    design = Design(n_stations, len(YEARS), revisit="[1-0]")
    scenario = Scenario.from_change(-0.3, over_years=len(YEARS) - 1)
    return simulate_dataset(components, design, scenario, np.random.default_rng(20260))


def _write_seasons(folder: Path, m: measures.Measure, stations: list[str], n: int | None) -> list[Path]:
    data = _simulated(m, len(stations), n)
    codes = dict(zip(sorted(data[C.STATION].unique()), stations, strict=True))   # Q0000 -> a demo station
    header = m.header(SPECIES, n)
    files = []
    for t, year in enumerate(YEARS):
        path = folder / f"season_{year}.csv"
        season = data[data[C.YEAR] == data[C.YEAR].min() + t]
        with open(path, "w", newline="") as f:
            w = csv.writer(f)
            w.writerow(["station", "date", "observers", "status", header])
            for row in season.to_dict("records"):
                value = float(row[m.value_column])
                text = str(int(round(value))) if m.rule.whole else f"{value:.2f}"
                w.writerow([codes[row[C.STATION]], f"{year}-06-20", "OBS01", "done", text])
        files.append(path)
    return files


def _demo_stations() -> pd.DataFrame:
    stations = pd.read_csv(DEMO / "stations.csv", dtype={"code": str, "site": str})
    stations = stations.rename(columns={"code": C.STATION})
    stations[C.QUADRAT_AREA] = stations[C.QUADRAT_WIDTH] * stations[C.QUADRAT_LENGTH]
    stations["epsg"] = json.loads((DEMO / "programme.json").read_text())["crs_epsg"]
    return stations


@pytest.mark.parametrize("code", measures.codes())
def test_every_measure_through_every_stage(code, tmp_path):
    """The stages themselves (no database): read, check, estimate, trend, power, report context, export."""
    from monitor.estimate import season_estimates
    from monitor.io.dwca import ProgrammeMetadata, write_dwca
    from monitor.io.records import read_field_records
    from monitor.io.validate import Reference, validate_records
    from monitor.power import Design, Scenario, components_from_trend, simulate_power
    from monitor.report import build_report_context
    from monitor.services.report import _estimate_rows
    from monitor.trend import TrendModel

    m = measures.REGISTRY[code]
    folder, annual, n = _programme_folder(tmp_path, m)
    stations = _demo_stations()
    files = _write_seasons(folder, m, annual, n)
    with stage(code, "import (read and check a field sheet)"):
        visits, observations = [], []
        reference = Reference(
            stations=stations[[C.STATION]].assign(retired=stations["retired"]),
            species=pd.DataFrame({C.SPECIES: [SPECIES], C.MEASURE: [code], "n": [n]}),
            targets=((SPECIES, code),), blanks_mean_zero=False, windows={}, species_windows={},
            today=dt.date(2030, 1, 1))
        for path in files:
            read = read_field_records(path)
            problems = validate_records(read.visits, read.observations, read.covariates, reference)
            assert [p for p in problems if p.severity == "error"] == [], problems[:3]
            visits.append(read.visits)
            observations.append(read.observations)
        visits, observations = pd.concat(visits), pd.concat(observations)
        assert len(observations) == len(annual) * len(YEARS)
        # a value outside the measure's rule is refused naming its row and field
        bad = observations.head(1).assign(value=-1.0)
        refused = validate_records(read.visits, bad, read.covariates.head(0), reference)
        assert any(p.expected == m.rule.wording(n) for p in refused), refused
    long = observations.assign(**{C.YEAR: pd.to_datetime(observations[C.DATE]).dt.year})
    long[m.value_column] = long["value"].astype(float)
    if m.trials_column is not None:
        long[m.trials_column] = long["n"].astype(float)
    long = long.merge(stations[[C.STATION, C.SITE]], on=C.STATION)
    with stage(code, "estimates"):
        sites = pd.DataFrame({C.SITE: sorted(stations[C.SITE].unique()), C.AREA: 10_000.0})
        table = season_estimates(long[long[C.YEAR] == YEARS[-1]], stations, sites, code, on_error="skip")
        assert len(table) >= 1
        assert (table["lower"] <= table["estimate"]).all() and (table["estimate"] <= table["upper"]).all()
        assert set(table["unit"]) == {m.estimate_unit}
    with stage(code, "trend"):
        result = TrendModel(long, code).fit()
        assert result.family == m.family and result.measure == code
        assert math.isfinite(result.annual_change.estimate)
    with stage(code, "power"):
        components = components_from_trend(result, trials=n, data=long)
        assert components.measure == code and components.family == m.family
        power = simulate_power(components, Design(len(annual), len(YEARS)),
                               Scenario.from_change(-0.3, over_years=len(YEARS) - 1),
                               rng=np.random.default_rng(5), n_replicates=3)
        assert 0 <= power.power <= 1
    with stage(code, "report context"):
        context = build_report_context({"name": "Registry walk (invented)"}, YEARS[-1], {(SPECIES, code): result},
                                       estimates=_estimate_rows(table.assign(species=SPECIES)),
                                       species_names={SPECIES: "registry testwort"})
        (section,) = context.species
        assert section.summary.measure_label == m.label
        assert m.subject_for("registry testwort").lower() in section.paragraph.lower(), section.paragraph
        assert m.quantity_label[0] in {e.quantity_label for e in context.estimates}
        assert all(e.estimate_text not in ("", "n/a") for e in context.estimates)
    with stage(code, "Darwin Core export"):
        species = pd.DataFrame({C.SPECIES: [SPECIES], "scientific_name": ["Testaria registrata (invented)"],
                                "common_name": ["registry testwort"], C.MEASURE: [code], "n": [n],
                                "sensitive": [False]})
        archive = write_dwca(tmp_path / "dwca.zip", metadata=ProgrammeMetadata(
            "TST", "Registry walk", "Invented records", "a tester (invented)", "an invented trust",
            "nobody@example.invalid"), stations=stations, species=species, visits=visits,
            observations=observations)
        _check_darwin_core(archive, m)


def _check_darwin_core(archive: Path, m: measures.Measure) -> None:
    with zipfile.ZipFile(archive) as z:
        names = z.namelist()
        occurrence = pd.read_csv(z.open(next(x for x in names if "occurrence" in x)), sep="\t", dtype=str)
        facts = pd.read_csv(z.open(next(x for x in names if "measurement" in x.lower())), sep="\t", dtype=str)
    ours = occurrence[occurrence["occurrenceID"].str.endswith(f":{SPECIES}:{m.code}")]
    assert len(ours) > 0
    if m.dwc_quantity_type is not None:
        assert ours["organismQuantityType"].notna().all()
    for fact in m.dwc_facts:
        kinds = facts[facts["occurrenceID"].isin(ours["occurrenceID"])]
        got = kinds[kinds["measurementType"] == fact.type]
        assert len(got) == len(ours), f"measurementType {fact.type!r} missing"
        assert set(got["measurementUnit"]) == {fact.unit}


@pytest.mark.slow
@pytest.mark.parametrize("code", measures.codes())
def test_every_measure_through_the_services(code, tmp_path):
    """The same walk as a user runs it: set-up, import into a database, estimates, trend, power, report
    folder and Darwin Core export from the database (slow: about half a minute a measure)."""
    from monitor.services import estimate, exports, imports, power, report, setup, trend

    m = measures.REGISTRY[code]
    db = str(tmp_path / "programme.sqlite")
    with stage(code, "setup"):
        folder, stations, n = _programme_folder(tmp_path, m)
        setup.init_database(db)
        setup.setup_folder(db, folder)
    with stage(code, "field sheets (simulated by the power model)"):
        files = _write_seasons(folder, m, stations, n)
    with stage(code, "import"):
        for path in files:
            imports.import_records(db, path)
    with stage(code, "estimates"):
        table = estimate.season_table(db, YEARS[-1])
        row = table[(table["species"] == SPECIES) & (table["measure"] == code)]
        assert len(row) >= 1, f"no estimate row: {table.to_dict('records')}"
        r = row.iloc[0]
        assert math.isfinite(r["estimate"]) and r["lower"] <= r["estimate"] <= r["upper"], r.to_dict()
        assert r["unit"] == m.estimate_unit
    with stage(code, "trend"):
        fitted = trend.fit_programme(db, species=[SPECIES])
        assert len(fitted) == 1, getattr(fitted, "not_called", fitted)
        result = fitted[0].result
        assert fitted[0].measure == code and result.family == m.family
        assert math.isfinite(result.annual_change.estimate)
    with stage(code, "power"):
        components, _source = power.components_for(db, SPECIES)
        assert components.measure == code and components.family == m.family
        study = power.power_study(components, "registry walk", change=-0.3, over_years=7, stations=[len(stations)],
                                  years=[len(YEARS)], replicates=4, seed=3, find_smallest=False, find_years=False)
        assert len(study.results) == 1 and 0 <= study.results[0].power <= 1
    with stage(code, "report"):
        out = report.write_report(db, YEARS[-1], tmp_path / "report", pdf=False)
        doc = json.loads((out / "report.json").read_text())
        text = json.dumps(doc)
        assert m.subject_for("registry testwort").split(" registry")[0] in text or m.label in text, \
            f"the report does not word the measure ({m.label!r})"
    with stage(code, "Darwin Core export"):
        _check_darwin_core(exports.export_dwca(db, tmp_path / "dwca.zip"), m)


def test_a_measure_without_an_absent_value_may_be_blank_and_is_never_filled_with_zero():
    """A shoot height exists only where the plant is: a blank on a done visit is no error, and a programme
    whose blanks mean zero adds no 0 for it (a 0 cm height would break its own rule); a count still is."""
    from monitor.io.validate import Reference, fill_blank_targets, validate_records
    from monitor.schedule.fieldpack import phone_sheet_fields

    visits = pd.DataFrame({C.STATION: ["Q1"], C.DATE: [dt.date(2026, 6, 1)], C.VISIT_STATUS: ["done"],
                           "source_row": [2]})
    observations = pd.DataFrame(columns=[C.STATION, C.DATE, C.SPECIES, C.MEASURE, "value", "n", "source_row",
                                         "source_field"])
    targets = ((SPECIES, C.MEASURE_SHOOT_HEIGHT), (SPECIES, C.MEASURE_COUNT))
    species = pd.DataFrame({C.SPECIES: [SPECIES, SPECIES], C.MEASURE: [c for _, c in targets], "n": [None, None]})
    reference = Reference(stations=pd.DataFrame({C.STATION: ["Q1"]}), species=species, targets=targets,
                          blanks_mean_zero=False, windows={}, species_windows={}, today=dt.date(2030, 1, 1))
    problems = validate_records(visits, observations, observations.iloc[:0, :0].assign(), reference)
    assert [p.field for p in problems] == [f"{SPECIES}:{C.MEASURE_COUNT}"]
    filled = fill_blank_targets(visits, observations, dataclasses.replace(reference, blanks_mean_zero=True))
    assert filled[C.MEASURE].tolist() == [C.MEASURE_COUNT] and filled["value"].tolist() == [0.0]
    zero_buttons = {f["measure"]: f["zero"] for f in phone_sheet_fields(targets)}
    assert zero_buttons == {C.MEASURE_SHOOT_HEIGHT: False, C.MEASURE_COUNT: True}


def test_entry_workbook_checks_each_value_column_by_its_measures_rule(tmp_path):
    """The .xlsx entry sheet's data validation (read back with openpyxl) follows the registry's rule."""
    from openpyxl import load_workbook

    from monitor.io.sheets import entry_workbook

    headers = {code: measures.REGISTRY[code].header(SPECIES, 25 if measures.REGISTRY[code].needs_n else None)
               for code in measures.codes()}
    rows = pd.DataFrame({"station": ["Q1"], "date": ["2026-06-01"], "status": [""]})
    path = entry_workbook(tmp_path / "entry.xlsx", rows, statuses=C.VISIT_STATUSES, observers=["OBS01"],
                          value_columns=[*headers.values(), "cov:soil[%]"])
    sheet = load_workbook(path).worksheets[0]
    column_of = {cell.value: cell.column_letter for cell in sheet[1]}
    rule_of = {str(v.sqref).split(":")[0]: v for v in sheet.data_validations.dataValidation}
    for code, header in headers.items():
        rule, v = measures.REGISTRY[code].rule, rule_of[f"{column_of[header]}2"]
        assert v.type == ("whole" if rule.whole else "decimal"), code
        assert float(v.formula1) == rule.minimum
        if rule.up_to_n:
            assert (v.operator, v.formula2) == ("between", "25")
        elif rule.maximum is not None:
            assert (v.operator, float(v.formula2)) == ("between", rule.maximum)
        else:
            assert v.operator == ("greaterThan" if rule.above_minimum else "greaterThanOrEqual")
    assert rule_of[f"{column_of['cov:soil[%]']}2"].operator == "greaterThanOrEqual"
