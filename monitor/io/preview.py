"""A field sheet's cells as the user sees them, numbered as the importer numbers rows (the header is row 1),
for showing a sheet with its problems marked.  Nothing is interpreted: every cell stays text."""

from __future__ import annotations

import itertools
import os
from pathlib import Path

from monitor.errors import InputError
from monitor.io._tables import _csv_rows, _xlsx_rows, decode_bytes, file_label


def sheet_rows(source: str | os.PathLike[str], *, max_rows: int = 5000) -> list[tuple[int, list[str]]]:
    """The first ``max_rows`` rows of a CSV or the sheet of an .xlsx the importer reads, as (row number, cells).

    A file that cannot be read at all gives no rows (the import's own check says why)."""
    path = Path(source)
    label = file_label(path)
    try:
        data = path.read_bytes()
        if data[:4] == b"PK\x03\x04" or path.suffix.lower() in (".xlsx", ".xlsm"):
            stream, _name = _xlsx_rows(path, label)
            rows = [(number, cells) for number, cells, _issues in itertools.islice(stream, max_rows)]
            stream.close()
        else:
            rows = list(itertools.islice(_csv_rows(decode_bytes(data, label)[0], label), max_rows))
    except (InputError, OSError):
        return []
    return rows
