"""Reading CSV files: delimiters, encodings, quoting, line numbers; pandas itself as the reference
for what a clean file must come back as."""

from __future__ import annotations

import io
import logging

import numpy as np
import pandas as pd
import pytest

from labbench.data import read_csv, load_table
from labbench.data.reading import read_file
from labbench.errors import DataError

ROWS = [["sugar", "variety", "grade"], ["12.5", "Gala", "premium"], ["10.25", "Cox", "juice"],
        ["11", "Gala", "standard"], ["9.5", "Fuji", "juice"]]


def write(tmp_path, text, name="t.csv", encoding="utf-8"):
    path = tmp_path / name
    path.write_bytes(text.encode(encoding) if isinstance(text, str) else text)
    return path


@pytest.mark.parametrize("delim", [",", ";", "\t"])
def test_delimiter_detected_and_frame_equals_pandas(tmp_path, delim):
    text = "\n".join(delim.join(r) for r in ROWS) + "\n"
    path = write(tmp_path, text)
    got = read_csv(path)
    # reference: pandas told the delimiter explicitly
    expected = pd.read_csv(io.StringIO(text), sep=delim)
    pd.testing.assert_frame_equal(got, expected)
    assert read_file(path).delimiter == delim


def test_quoted_fields_keep_delimiters_quotes_and_line_breaks(tmp_path):
    text = ('name,notes,weight\n"Cox, late","said ""crisp""",180\n'
            '"Gala","two\nlines",175\nFuji,plain,190\n')
    path = write(tmp_path, text)
    got = read_csv(path)
    assert got["name"].tolist() == ["Cox, late", "Gala", "Fuji"]
    assert got["notes"].tolist() == ['said "crisp"', "two\nlines", "plain"]
    assert got["weight"].tolist() == [180, 175, 190]
    # line numbers count the line break inside the quoted value
    assert read_file(path).lines.tolist() == [2, 3, 5]


def test_ragged_row_after_a_multiline_value_names_the_right_line(tmp_path):
    text = 'a,b,c\n1,"x\ny",3\n4,5\n'
    with pytest.raises(DataError, match="line 4 has 2 values"):
        read_csv(write(tmp_path, text))


def test_stray_quote_inside_a_value_is_not_a_quote(tmp_path):
    # the csv module and pandas read a quote in the middle of an unquoted value literally
    text = 'item,size,price\npipe,12" long,3.5\nbolt,small,0.2\n'
    got = read_csv(write(tmp_path, text))
    assert got["size"].tolist() == ['12" long', "small"]


def test_utf8_with_and_without_bom_read_the_same(tmp_path):
    text = "café,prix\nété,1.5\nnoël,2.0\n"
    plain = read_file(write(tmp_path, text, "a.csv"))
    bom = read_file(write(tmp_path, b"\xef\xbb\xbf" + text.encode("utf-8"), "b.csv"))
    pd.testing.assert_frame_equal(plain.frame, bom.frame)
    assert list(bom.frame.columns) == ["café", "prix"]      # no BOM glued to the first name
    assert (plain.encoding, bom.encoding) == ("utf-8", "utf-8-sig")
    assert plain.warnings == bom.warnings == ()


def test_utf16_with_bom(tmp_path):
    text = "café\tprix\nété\t1.5\nnoël\t2.0\n"
    got = read_file(write(tmp_path, text.encode("utf-16"), "u16.csv"))
    assert got.encoding == "utf-16" and got.delimiter == "\t"
    assert got.frame["café"].tolist() == ["été", "noël"]


def test_latin1_fallback_warns_in_log_and_table(tmp_path, caplog):
    text = "variety;sugar;grade\nReine des reinettes;12,5;premium\nBelle de Boskoop;11,0;juice\nCalville;9,0;juice\n"
    path = write(tmp_path, text.replace("Reine", "Reine é").replace("Calville", "Calvillé"), encoding="latin-1")
    with caplog.at_level(logging.WARNING, logger="labbench.data"):
        table = load_table(path, "grade")
    assert any("latin-1" in w and "line 2" in w for w in table.warnings)
    assert any("latin-1" in r.getMessage() for r in caplog.records)
    assert table.frame["variety"].tolist()[0] == "Reine é des reinettes"
    # decimal commas of a semicolon file become numbers
    assert table.kinds["sugar"] == "numeric"
    np.testing.assert_array_equal(table.frame["sugar"].to_numpy(), [12.5, 11.0, 9.0])


def test_crlf_blank_lines_and_spaces(tmp_path):
    text = "sugar , variety,grade\r\n12.5, Gala,premium\r\n\r\n10.0, Cox,juice\r\n11.0,Gala,standard"
    path = write(tmp_path, text)
    got = read_file(path)
    assert list(got.frame.columns) == ["sugar", "variety", "grade"]
    assert got.frame["variety"].tolist() == ["Gala", "Cox", "Gala"]
    assert got.frame["sugar"].tolist() == [12.5, 10.0, 11.0]
    assert got.lines.tolist() == [2, 4, 5]


def test_one_column_file_reads(tmp_path):
    got = read_csv(write(tmp_path, "grade\npremium\njuice\n"))
    assert list(got.columns) == ["grade"] and len(got) == 2


def test_semicolon_inside_quotes_does_not_fool_detection(tmp_path):
    text = 'name,notes,grade\n"a","x;y;z",p\n"b","u;v;w",q\n"c","r;s;t",p\n'
    assert read_file(write(tmp_path, text)).delimiter == ","


def test_decimal_point_in_semicolon_file_is_kept(tmp_path):
    got = read_csv(write(tmp_path, "a;b\n1.5;x\n2.25;y\n"))
    assert got["a"].tolist() == [1.5, 2.25]


def test_large_file_reads_and_agrees_with_pandas(tmp_path):
    rng = np.random.default_rng(0)
    frame = pd.DataFrame(rng.normal(size=(20000, 4)).round(5), columns=list("abcd"))
    frame["c"] = rng.choice(["x", "y, z", 'q"uote'], len(frame))
    path = tmp_path / "big.csv"
    frame.to_csv(path, index=False)          # pandas quotes what needs quoting
    got = read_file(path)
    pd.testing.assert_frame_equal(got.frame, pd.read_csv(path))
    assert got.lines[-1] == len(frame) + 1


def test_whitespace_only_lines_are_skipped_like_pandas_does(tmp_path):
    text = "a,b,y\n1,2,p\n   \n3,4,q\n"
    got = read_file(write(tmp_path, text))
    pd.testing.assert_frame_equal(got.frame, pd.read_csv(io.StringIO(text), skipinitialspace=True))
    assert got.lines.tolist() == [2, 4]


def test_old_mac_line_ends(tmp_path):
    got = read_csv(write(tmp_path, "a,b,y\r1,2,p\r3,4,q\r"))
    assert list(got.columns) == ["a", "b", "y"] and got["b"].tolist() == [2, 4]


def test_trailing_delimiter_column_is_ignored_with_a_warning(tmp_path):
    got = read_file(write(tmp_path, "a,b,\n1,2,\n3,4,\n"))
    assert list(got.frame.columns) == ["a", "b"]
    assert any("column 3 has no name and no values" in w for w in got.warnings)
    with pytest.raises(DataError, match="has no column names"):
        read_csv(write(tmp_path, ",,\n1,2,3\n", "blank_header.csv"))


def test_long_one_column_file_with_blank_lines(tmp_path):
    text = "grade\n" + "premium\n" * 1500 + "\n  \n" + "juice\n" * 600
    got = read_file(write(tmp_path, text))
    assert len(got.frame) == 2100 and got.lines[-1] == 2103
