"""Tests for benchlog.py: reading one channel of a bench log, and refusing bad rows clearly."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
from meanband import TrialError
from meanband.collect.benchlog import read_column

CSV_LOG = """\
# rig 3, channel map v2
# elapsed_s is seconds since start
elapsed_s,plate_degC,ambient_degC
0.5,85.02,21.4
1.0,84.97,21.4

# operator paused here
1.5,85.11,21.5
2.0,85.04,21.5
"""


def write(tmp_path: Path, text: str, name: str = "log.csv") -> Path:
    path = tmp_path / name
    path.write_text(text, encoding="utf-8")
    return path


def test_csv_with_header_and_comments_by_name_and_index(tmp_path) -> None:
    path = write(tmp_path, CSV_LOG)
    expected = [85.02, 84.97, 85.11, 85.04]
    assert read_column(path, "plate_degC").tolist() == expected
    assert read_column(path, 1).tolist() == expected
    assert read_column(str(path), "ambient_degC").tolist() == [21.4, 21.4, 21.5, 21.5]


def test_csv_agrees_with_numpy_loadtxt(tmp_path) -> None:
    path = write(tmp_path, CSV_LOG)
    # Reference library: numpy.loadtxt with '#' comments, ',' delimiter and one header row.
    reference = np.loadtxt(path, delimiter=",", comments="#", skiprows=3, usecols=1)
    np.testing.assert_array_equal(read_column(path, "plate_degC"), reference)


def test_whitespace_log_without_header(tmp_path) -> None:
    path = write(tmp_path, "# t  volts\n0.1   3.301\n0.2\t3.298\n  0.3 3.300  \n", "log.txt")
    assert read_column(path, 1).tolist() == [3.301, 3.298, 3.300]
    # Reference library: numpy.loadtxt splits on whitespace by default.
    np.testing.assert_array_equal(read_column(path, 0), np.loadtxt(path, usecols=0))


def test_whitespace_log_with_header(tmp_path) -> None:
    path = write(tmp_path, "time volts\n0.1 3.301\n0.2 3.298\n", "log.txt")
    assert read_column(path, "volts").tolist() == [3.301, 3.298]


def test_single_column_needs_no_column_argument(tmp_path) -> None:
    path = write(tmp_path, "12.01\n11.98\n12.00\n", "log.txt")
    assert read_column(path).tolist() == [12.01, 11.98, 12.00]


@pytest.mark.parametrize(("sep", "name"), [(";", "log.csv"), ("\t", "log.tsv")])
def test_semicolon_and_tab_are_detected(tmp_path, sep, name) -> None:
    path = write(tmp_path, f"a{sep}b\n1{sep}2.5\n3{sep}4.5\n", name)
    assert read_column(path, "b").tolist() == [2.5, 4.5]


def test_quoted_csv_fields_and_byte_order_mark(tmp_path) -> None:
    path = tmp_path / "log.csv"
    path.write_bytes('\ufeff"note","value"\n"warm, stable",1.5\n"cold",2.5\n'.encode())
    assert read_column(path, "value").tolist() == [1.5, 2.5]


def test_explicit_header_flag_and_delimiter(tmp_path) -> None:
    path = write(tmp_path, "1 2\n3 4\n5 6\n", "log.txt")
    assert read_column(path, 1, header=True).tolist() == [4.0, 6.0]
    assert read_column(path, 1, header=False).tolist() == [2.0, 4.0, 6.0]
    path = write(tmp_path, "1|2\n3|4\n", "log.psv")
    assert read_column(path, 1, delimiter="|").tolist() == [2.0, 4.0]


def test_a_bad_value_names_its_line_counting_comments_and_blanks(tmp_path) -> None:
    text = CSV_LOG.replace("1.5,85.11,21.5", "1.5,85.1l,21.5")  # an 'l' typed for a '1'
    path = write(tmp_path, text)
    with pytest.raises(TrialError, match=r"log\.csv, line 8: column 'plate_degC' holds '85\.1l'"):
        read_column(path, "plate_degC")
    # Another column of the same file is clean and reads.
    assert read_column(path, "ambient_degC").size == 4


def test_an_empty_field_is_refused(tmp_path) -> None:
    path = write(tmp_path, "a,b\n1,2\n3,\n")
    with pytest.raises(TrialError, match=r"line 3: column 'b' holds ''"):
        read_column(path, "b")


@pytest.mark.parametrize("word", ["nan", "inf", "-Infinity"])
def test_non_finite_values_are_refused(tmp_path, word) -> None:
    path = write(tmp_path, f"v\n1.0\n{word}\n2.0\n")
    with pytest.raises(TrialError, match=r"line 3: .*not a finite number"):
        read_column(path, "v")


def test_a_short_row_is_refused(tmp_path) -> None:
    path = write(tmp_path, "a b c\n1 2 3\n4 5\n", "log.txt")
    with pytest.raises(TrialError, match=r"line 3: column 'c' is missing \(the row has 2 fields\)"):
        read_column(path, "c")


def test_missing_file(tmp_path) -> None:
    with pytest.raises(TrialError, match=r"cannot read the bench log .*absent\.csv"):
        read_column(tmp_path / "absent.csv", 0)


def test_a_directory_is_not_a_log(tmp_path) -> None:
    with pytest.raises(TrialError, match="cannot read the bench log"):
        read_column(tmp_path, 0)


def test_binary_garbage_names_the_line(tmp_path) -> None:
    path = tmp_path / "log.csv"
    path.write_bytes(b"v\n1.0\n\xff\xfe2.0\n")
    with pytest.raises(TrialError, match="line 3: bytes that are not UTF-8"):
        read_column(path, 0)


@pytest.mark.parametrize(
    ("text", "column", "match"),
    [
        ("", 0, "holds no data"),
        ("# only a comment\n\n", 0, "holds no data"),
        ("a,b\n", "a", "header .*but no data rows"),
        ("a,b\n1,2\n", "c", r"no column named 'c'.*columns 'a', 'b'"),
        ("a,a\n1,2\n", "a", "names 2 columns 'a'"),
        ("1,2\n3,4\n", "a", "no header line; give a 0-based index"),
        ("a,b\n1,2\n", None, r"columns 'a', 'b'; say which one with column="),
        ("1,2\n3,4\n", None, "2 columns; say which one"),
        ("1,2\n3,4\n", 2, r"column 2 does not exist.*0\.\.1"),
        ("1,2\n3,4\n", -1, "must be >= 0"),
        ("1,2\n3,4\n", 1.0, "header name or a 0-based index"),
        ("1,2\n3,4\n", True, "header name or a 0-based index"),
    ],
)
def test_column_and_layout_errors(tmp_path, text, column, match) -> None:
    path = write(tmp_path, text)
    with pytest.raises(TrialError, match=match):
        read_column(path, column)
