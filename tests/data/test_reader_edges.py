"""The reader's hard edge: odd encodings, stray carriage returns, very wide headers, huge fields.
Each is read correctly or refused with one line naming the file, the line and the fix."""

from __future__ import annotations

import io

import pandas as pd
import pytest

from labbench.data import load_table
from labbench.data.reading import read_file
from labbench.errors import DataError


def write(tmp_path, data: bytes, name="t.csv"):
    path = tmp_path / name
    path.write_bytes(data)
    return path


def one_line_error(path, *words):
    with pytest.raises(DataError) as info:
        read_file(path)
    message = str(info.value)
    assert "\n" not in message and message.startswith(str(path)), message
    for word in words:
        assert word in message, message
    return message


def test_utf16_with_an_odd_byte_count_is_one_line(tmp_path):
    path = write(tmp_path, "a,b,y\n1,2,3\n4,5,6\n".encode("utf-16") + b"\x00")
    one_line_error(path, "UTF-16", "save the file")


def test_stray_carriage_return_in_the_header_is_one_line(tmp_path):
    path = write(tmp_path, b"a,b\r,y\n1,2,3\n4,5,6\n")
    one_line_error(path, "line 1", "carriage return")


def test_mixed_line_endings_name_the_line(tmp_path):
    path = write(tmp_path, b"a,b,y\r\n1,2,3\r4,5,6\n7,8,9\r\n")
    one_line_error(path, "line 2", "line end")


def test_carriage_return_inside_quotes_is_a_value(tmp_path):
    path = write(tmp_path, b'a,b,y\n1,"two\rparts",3\n4,five,6\n')
    frame = read_file(path).frame
    assert frame.shape == (2, 3) and frame["b"].tolist()[0] == "two\rparts"


def test_a_10002_column_file_with_a_wide_header_reads(tmp_path):
    # header line of ~130 KB (over the 64 KB the delimiter sample used to look at)
    names = [f"column_{i:05d}" for i in range(10002)]
    text = ",".join(names) + "\n" + ",".join("1" for _ in names) + "\n" + ",".join("2" for _ in names) + "\n"
    assert len(text.splitlines()[0]) > 65536
    path = write(tmp_path, text.encode())
    frame = read_file(path).frame
    # reference: pandas with the delimiter given
    pd.testing.assert_frame_equal(frame, pd.read_csv(io.StringIO(text)))


@pytest.mark.parametrize("quoted", [False, True])
def test_a_5_megabyte_field_reads(tmp_path, quoted):
    big = "x" * 5_000_000 if not quoted else '"' + "x;" * 2_500_000 + '"'
    text = f"a,b,y\n1,{big},3\n4,5,6\n7,8,9\n"
    path = write(tmp_path, text.encode())
    frame = read_file(path).frame
    assert frame.shape == (3, 3) and len(frame["b"].iloc[0]) == 5_000_000
    table = load_table(path, "y", kinds={"b": "categorical"})
    assert table.n_rows == 3


def test_a_5_megabyte_header_field_is_one_line(tmp_path):
    text = "a," + "b" * 5_000_000 + ",y\n1,2,3\n4,5,6\n"
    path = write(tmp_path, text.encode())
    try:
        frame = read_file(path).frame
    except DataError as exc:
        assert "\n" not in str(exc) and str(exc).startswith(str(path)) and "line 1" in str(exc)
    else:
        assert frame.shape == (2, 3)
