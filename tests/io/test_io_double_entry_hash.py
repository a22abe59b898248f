"""Double-entry comparison and content hashes.  Invented records."""

from __future__ import annotations

import datetime as dt

import pytest

from monitor.errors import InputError
from monitor.io.double_entry import compare_entries
from monitor.io.hashing import content_hash

A = ("station,date,observers,status,ANEMNE:count,PRIMUL:frequency/25,cov:soil_moisture[%]\n"
     "Q01,2021-05-03,OB1,done,12,7,30\n"
     "Q02,2021-05-03,OB1,done,0,3,\n"
     "Q03,2021-05-04,,missed,,,\n")


def _write(tmp_path, name, text):
    path = tmp_path / name
    path.write_text(text, encoding="utf-8")
    return path


def test_identical_entries_agree(tmp_path):
    assert compare_entries(_write(tmp_path, "a.csv", A), _write(tmp_path, "b.csv", A)).empty


def test_every_difference_listed(tmp_path):
    b = (A.replace("Q01,2021-05-03,OB1,done,12,7,30", "Q01,2021-05-03,OB2,done,21,7,3")
          .replace("Q02,2021-05-03,OB1,done,0,3,", "Q02,2021-05-03,OB1,done,,3,")
          .replace("Q03,2021-05-04", "Q03,2021-05-05"))
    diff = compare_entries(_write(tmp_path, "a.csv", A), _write(tmp_path, "b.csv", b))
    got = set(zip(diff["station"], diff["field"], diff["value_a"], diff["value_b"], strict=True))
    assert got == {
        ("Q01", "observers", "OB1", "OB2"),
        ("Q01", "count", 12.0, 21.0),
        ("Q01", "cov:soil_moisture", "30 [%]", "3 [%]"),
        ("Q02", "count", 0.0, None),          # a zero keyed in one, blank in the other: not the same
        ("Q03", "visit", "present", None),
        ("Q03", "visit", None, "present"),
    }
    row = diff[(diff["station"] == "Q01") & (diff["field"] == "count")].iloc[0]
    assert row["species"] == "ANEMNE" and row["date"] == dt.date(2021, 5, 3) and row["row_a"] == 2


def test_long_against_wide_keying(tmp_path):
    long_text = ("station,date,observers,status,species,measure,value,n,cov:soil_moisture[%]\n"
                 "Q01,2021-05-03,OB1,done,ANEMNE,count,12,,30\n"
                 "Q01,2021-05-03,OB1,done,PRIMUL,frequency,7,25,30\n"
                 "Q02,2021-05-03,OB1,done,ANEMNE,count,0,,\n"
                 "Q02,2021-05-03,OB1,done,PRIMUL,frequency,3,25,\n"
                 "Q03,2021-05-04,,missed,,,,,\n")
    assert compare_entries(_write(tmp_path, "a.csv", A), _write(tmp_path, "b.csv", long_text)).empty


def test_content_hash_known_vectors(tmp_path):
    # FIPS 180-2 Appendix B.1 / NIST example: SHA-256("abc")
    assert content_hash(b"abc") == "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad"
    # SHA-256 of the empty string (NIST CSRC example values)
    path = _write(tmp_path, "empty.csv", "")
    assert content_hash(path) == "e3b0c44298fc1c149afbf4c8996fb92427ae41e4649b934ca495991b7852b855"
    # bytes, not text: a line-ending change is a different file
    assert content_hash(b"a\r\n") != content_hash(b"a\n")
    with pytest.raises(InputError):
        content_hash(tmp_path / "missing.csv")
