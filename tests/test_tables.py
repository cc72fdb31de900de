"""Tests of envpredict.tables: the one reader and writer of result tables (CSV).

The reference is Python's own ``csv`` module (RFC 4180 quoting) used directly in the
test, and the float round trip of ``repr`` (the shortest text that reads back to the
same IEEE 754 double, Python language reference).
"""

from __future__ import annotations

import csv
import math
import subprocess
import sys

import numpy as np
import pytest

from envpredict.exceptions import InputError
from envpredict.tables import (
    cell_float,
    cell_number,
    csv_line,
    format_cell,
    parse_lines,
    read_results,
    read_table,
    resolve_column,
    table_text,
    write_table,
)

AWKWARD = ["plain", "a,comma", 'a "quote"', " spaces ", "ünïcödé", ""]


def _write(path, rows, **kw):
    with open(path, "w", newline="", encoding="utf-8") as fh:
        csv.writer(fh, **kw).writerows(rows)
    return path


def test_read_table_returns_what_the_csv_module_wrote(tmp_path):
    header = ["name", "note", "value"]
    rows = [[a, b, "1.5"] for a, b in zip(AWKWARD, reversed(AWKWARD))]
    p = _write(tmp_path / "t.csv", [header] + rows)
    got_header, got = read_table(p, "table")
    assert got_header == header
    # blank lines are skipped, so the line numbers are the physical ones (header = 1)
    assert [line for line, _ in got] == list(range(2, 2 + len(rows)))
    assert [[r[c] for c in header] for _, r in got] == rows


def test_read_table_skips_blank_lines_and_names_the_row_of_a_bad_one(tmp_path):
    p = tmp_path / "t.csv"
    p.write_text("\n\nx,y\n1,2\n\n3,4,5\n", encoding="utf-8")
    with pytest.raises(InputError, match=r"row 6: 3 cell\(s\) but the header has 2"):
        read_table(p, "table")


@pytest.mark.parametrize("text,what", [
    ("", "is empty"),
    ("a,a\n1,2\n", "appears more than once"),
    ("a,,b\n1,2,3\n", "column 2 of the header has no name"),
    ("a;b;c\n1;2;3\n", "';' as separator"),
])
def test_read_table_refuses_malformed_headers(tmp_path, text, what):
    p = tmp_path / "t.csv"
    p.write_text(text, encoding="utf-8")
    with pytest.raises(InputError, match=what):
        read_table(p, "table")


def test_read_table_refuses_missing_folder_and_non_utf8(tmp_path):
    with pytest.raises(InputError, match="does not exist"):
        read_table(tmp_path / "nope.csv", "table")
    with pytest.raises(InputError, match="is a folder"):
        read_table(tmp_path, "table")
    bad = tmp_path / "latin1.csv"
    bad.write_bytes("a,b\ncafé,1\n".encode("latin-1"))
    with pytest.raises(InputError, match="not UTF-8"):
        read_table(bad, "table")


@pytest.mark.parametrize("v", [0.1, 1 / 3, 2.0 ** -1074, 1e300, -0.0, math.pi, 0.30000000000000004])
def test_format_cell_reads_back_to_the_same_double(v):
    # repr is the shortest round-tripping text (Python float repr); a rounded format
    # such as '%.6g' would fail for 1/3 and 0.30000000000000004
    assert float(format_cell(v)) == v
    assert float(format_cell(np.float64(v))) == v


def test_format_cell_missing_and_text():
    assert format_cell(None) == format_cell(float("nan")) == format_cell(float("inf")) == ""
    assert format_cell(True) == "true" and format_cell(7) == "7"
    assert format_cell("two\nlines  here") == "two lines here"


def test_csv_line_and_table_text_match_the_csv_module():
    buf = []

    class W:
        def write(self, s):
            buf.append(s)

    csv.writer(W(), lineterminator="\n").writerow(AWKWARD)
    assert csv_line(AWKWARD) == "".join(buf)
    header = ["a", "b"]
    rows = [{"a": "1,2", "b": 'x"y'}]
    assert table_text(header, rows) == 'a,b\n"1,2","x""y"\n'


def test_write_table_round_trips_through_read_table(tmp_path):
    header = ["k", "v"]
    rows = [{"k": a, "v": str(i)} for i, a in enumerate(AWKWARD) if a.strip()]
    p = write_table(tmp_path / "w.csv", header, rows)
    h, got = read_table(p, "table")
    assert h == header and [r for _, r in got] == rows


def test_parse_lines_drops_a_torn_last_line():
    header, rows, torn = parse_lines("row,x\n1,a\n2,b\n3,c", "f.csv")
    assert header == ["row", "x"] and rows == [["1", "a"], ["2", "b"]] and torn
    header, rows, torn = parse_lines("row,x\n1,a\n", "f.csv")
    assert rows == [["1", "a"]] and not torn
    assert parse_lines("row,x", "f.csv") == (None, [], True)


def test_read_results_of_a_file_still_being_written(tmp_path):
    p = tmp_path / "r.csv"
    p.write_text('row,clean,stoi\n1,"a,b.wav",0.5\n2,c.wav,0.', encoding="utf-8")
    cols, rows = read_results(p)
    assert cols == ("row", "clean", "stoi") and rows == [{"row": "1", "clean": "a,b.wav", "stoi": "0.5"}]
    p.write_text("", encoding="utf-8")
    with pytest.raises(InputError, match="is empty"):
        read_results(p)


def test_cells():
    assert cell_number(" 0.25 ") == 0.25 and cell_number(np.float32(0.5)) == 0.5
    assert cell_number("") is None and cell_number("n/a") is None and cell_number("nan") is None
    row = {"x": "0.7", "e": "", "t": "70 %"}
    assert cell_float(row, "x", 3, "f") == 0.7
    assert math.isnan(cell_float(row, "e", 3, "f", blank_ok=True))
    with pytest.raises(InputError, match="row 3, column 'e': empty cell"):
        cell_float(row, "e", 3, "f")
    with pytest.raises(InputError, match="'70 %' is not a number"):
        cell_float(row, "t", 3, "f")
    assert resolve_column(["STOI", "b"], "stoi", "f") == "STOI"
    with pytest.raises(InputError, match="has no column 'c'"):
        resolve_column(["a", "b"], "c", "f")


def test_stats_reads_tables_without_importing_batch():
    # the comparison of a results table needs the table vocabulary, not the batch runner
    code = "import sys, envpredict.stats; print('envpredict.batch' in sys.modules)"
    r = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=60)
    assert r.returncode == 0, r.stderr
    assert r.stdout.strip() == "False"
