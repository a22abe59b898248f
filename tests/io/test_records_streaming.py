"""The field-record reader reads a sheet's rows a chunk at a time: what it returns and every problem it
lists (with their order, counts and totals) are those of reading the whole sheet at once, and its memory
does not grow with the rows it refuses.  Invented data."""

from __future__ import annotations

import random
import tracemalloc

import openpyxl
import pandas as pd
import pytest

from monitor.errors import InputError
from monitor.io import records as R

HEADER = ["station", "date", "observers", "status", "repeat", "notes", "ANEMNE:count", "CALLUV:cover",
          "PRIMUL:frequency/25", "ORCHID:presence", "cov:soil_moisture[%]"]


def _rows(n: int, seed: int) -> list[list[str]]:
    """Rows of every kind a tired hand types: good ones, repeated station-dates (across chunk borders too),
    bad dates and statuses, values that are not numbers, decimal commas that shift the row, percents."""
    rng = random.Random(seed)
    out = []
    for i in range(n):
        station = f"Q{rng.randrange(40):02d}"
        row = [station, f"2021-05-{1 + rng.randrange(28):02d}", "OB1;OB2", "done", "", "", str(rng.randrange(50)),
               f"{rng.randrange(1000) / 10}", str(rng.randrange(26)), rng.choice(["yes", "no", "0", "1"]),
               f"{rng.randrange(100)}"]
        kind = rng.randrange(12)
        if kind == 0:
            row[1] = "31/02/2021"
        elif kind == 1:
            row[3] = "finished"
        elif kind == 2:
            row[6] = "x"
        elif kind == 3:
            row[7] = "12,5"  # a decimal comma in a comma-separated file: one cell too many
            row = ",".join(row).split(",")
        elif kind == 4:
            row[8] = "12%"
        elif kind == 5:
            row[3], row[6:10] = "missed", ["", "", "", ""]
        elif kind == 6:
            row[2] = ""
        out.append(row)
    return out


def _csv(path, rows, header=HEADER):
    path.write_text("\n".join(",".join(r) for r in [header, *rows]) + "\n", encoding="utf-8")
    return path


def _read(path, chunk, monkeypatch, **kwargs):
    monkeypatch.setattr(R, "CHUNK_ROWS", chunk)
    try:
        return R.read_field_records(path, **kwargs), None
    except InputError as exc:
        return None, exc


def _same(a, b):
    (ra, ea), (rb, eb) = a, b
    if ea is not None or eb is not None:
        assert ea is not None and eb is not None
        assert [p.line() for p in ea.problems] == [p.line() for p in eb.problems]
        assert (ea.total, ea.counts) == (eb.total, eb.counts)
        return
    for name in ("visits", "observations", "covariates"):
        pd.testing.assert_frame_equal(getattr(ra, name), getattr(rb, name))
    pa = [] if ra.problems is None else [p.line() for p in ra.problems.kept()]
    pb = [] if rb.problems is None else [p.line() for p in rb.problems.kept()]
    assert pa == pb
    if ra.problems is not None:
        assert (ra.problems.total, ra.problems.counts) == (rb.problems.total, rb.problems.counts)


@pytest.mark.parametrize("seed", [1, 2, 3])
@pytest.mark.parametrize("keep_going", [True, False])
def test_chunks_read_as_the_whole_sheet(tmp_path, monkeypatch, seed, keep_going):
    path = _csv(tmp_path / "sheet.csv", _rows(700, seed))
    whole = _read(path, 10**9, monkeypatch, keep_going=keep_going)
    for chunk in (1, 7, 64):
        _same(_read(path, chunk, monkeypatch, keep_going=keep_going), whole)
    assert whole[0] is None or len(whole[0].visits) > 0  # the sheet had something to read


def test_chunks_of_a_clean_sheet_and_a_missing_column(tmp_path, monkeypatch):
    rows = [r for r in _rows(300, 4) if len(r) == len(HEADER)]
    clean = _csv(tmp_path / "clean.csv", [r for r in rows if r[3] == "done" and r[6].isdigit() and r[2]
                                          and not r[1].startswith("31") and "%" not in r[8]][:40])
    _same(_read(clean, 3, monkeypatch), _read(clean, 10**9, monkeypatch))
    # a required column missing: every row's shape is still checked and listed, in the same order
    no_status = _csv(tmp_path / "no_status.csv", [r[:3] + r[4:] for r in _rows(200, 5)],
                     header=HEADER[:3] + HEADER[4:])
    _same(_read(no_status, 5, monkeypatch), _read(no_status, 10**9, monkeypatch))
    assert _read(no_status, 5, monkeypatch)[1] is not None


def test_chunks_of_a_workbook_with_formulas(tmp_path, monkeypatch):
    book = openpyxl.Workbook()
    sheet = book.active
    sheet.append(HEADER)
    for k, row in enumerate(r for r in _rows(120, 6) if len(r) == len(HEADER)):
        cells: list[object] = list(row)
        if k % 17 == 3:
            cells[6] = "=1+1"  # a formula without a stored result (openpyxl calculates nothing)
        sheet.append(cells)
    path = tmp_path / "sheet.xlsx"
    book.save(path)
    whole = _read(path, 10**9, monkeypatch, keep_going=True)
    _same(_read(path, 4, monkeypatch, keep_going=True), whole)
    assert whole[0].problems is not None and any("formula" in p.expected for p in whole[0].problems.kept())


def test_memory_does_not_grow_with_the_rows_refused(tmp_path, monkeypatch):
    """8,000 rows of garbage (the benchmark's kind, tests/benchmarks/bench_garbage.py) read 250 at a time:
    Python's allocations peak at the file's text plus one chunk and the first problems (measured: 1.4 MB for
    this 0.33 MB file), not at the rows held as strings (measured: 5.6 MB read whole, 0.6 KB a row)."""
    n = 8_000
    path = tmp_path / "garbage.csv"
    with path.open("w", encoding="utf-8") as handle:
        handle.write(",".join(HEADER) + "\n")
        for i in range(n):
            handle.write(f"NO-{i % 997},2021-05-03,OB1,done,no,,x,x,x,x,x\n")
    size_mb = path.stat().st_size / 1e6
    monkeypatch.setattr(R, "CHUNK_ROWS", 250)
    tracemalloc.start()
    try:
        with pytest.raises(InputError) as caught:
            R.read_field_records(path)
        _current, peak = tracemalloc.get_traced_memory()
    finally:
        tracemalloc.stop()
    assert caught.value.total == n * 5 + (n - 997)  # every cell counted: five values a row, and the repeats
    assert len(caught.value.problems) == 100
    assert peak / 1e6 < 2 * size_mb + 1.5, f"peak {peak / 1e6:.1f} MB for a {size_mb:.2f} MB file"
