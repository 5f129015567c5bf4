"""Mutation fuzzing of the reader: whatever bytes a damaged CSV holds, only labbench's own errors
(one-line DataErrors) escape ``read_file`` and ``load_table`` - never a decode error, a csv-module
error, a pandas error or a hang.

Bounded to a few seconds by default; ``LABBENCH_FUZZ_EXAMPLES=20000`` runs a longer search.
"""

from __future__ import annotations

import os
import signal
import tempfile
from pathlib import Path

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from labbench.data import load_table
from labbench.data.reading import read_file
from labbench.errors import LabbenchError

EXAMPLES = int(os.environ.get("LABBENCH_FUZZ_EXAMPLES", "150"))

VALID = (
    'id,variety,sugar,"note, free",size,grade\n'
    'a1,Gala,12.5,"crisp, ""red""",3,premium\n'
    "a2,Cox,10.25,plain,2,juice\n"
    'a3,Fuji,,"two\nlines",1,standard\n'
    "a4,Gala,11.0,,3,juice\n"
    "a5,Cox,9.5,n/a,2,premium\n"
    "a6,Fuji,13.1,ok,1,standard\n"
)
BASES = [
    VALID.encode("utf-8"),
    b"\xef\xbb\xbf" + VALID.replace(",", ";").replace("12.5", "12,5").encode("utf-8"),
    VALID.replace(",", "\t").replace("\n", "\r\n").encode("utf-8"),
    VALID.encode("utf-16"),
    VALID.replace("Cox", "Côx").encode("latin-1"),
]
SNIPPETS = [b"\x00", b'"', b"\r", b"\n", b"\r\n", b"\xef\xbb\xbf", b"\xff\xfe", b"\xfe\xff",
            b",", b";", b"\t", b"\xff", b"\xc3", b"\x80", b'""', b"inf", b"-", b"?", b"\xe9"]
ENCODINGS = ["utf-16", "utf-16-le", "utf-16-be", "utf-32", "cp1252", "latin-1"]


@st.composite
def mutated(draw):
    data = bytearray(draw(st.sampled_from(BASES)))
    for _ in range(draw(st.integers(1, 6))):
        op = draw(st.sampled_from(["flip", "insert", "delete", "snippet", "truncate", "encode"]))
        i = draw(st.integers(0, len(data)))
        if op == "flip" and i < len(data):
            data[i] ^= 1 << draw(st.integers(0, 7))
        elif op == "insert":
            data[i:i] = bytes([draw(st.integers(0, 255))])
        elif op == "delete" and i < len(data):
            del data[i:i + draw(st.integers(1, 8))]
        elif op == "snippet":
            data[i:i] = draw(st.sampled_from(SNIPPETS))
        elif op == "truncate":
            del data[i:]
        elif op == "encode":
            text = bytes(data).decode("utf-8", "replace")
            data = bytearray(text.encode(draw(st.sampled_from(ENCODINGS)), "replace"))
    return bytes(data)


class _Hang(Exception):
    pass


def _alarm(*_args):
    raise _Hang("the reader took more than 10 s on a tiny file")


@pytest.fixture(scope="module")
def scratch():
    with tempfile.TemporaryDirectory() as folder:
        yield Path(folder) / "fuzz.csv"


@settings(max_examples=EXAMPLES, deadline=None, derandomize=EXAMPLES <= 150,
          suppress_health_check=[HealthCheck.too_slow, HealthCheck.function_scoped_fixture])
@given(data=mutated())
def test_only_labbench_errors_escape_the_reader(scratch, data):
    scratch.write_bytes(data)
    old = signal.signal(signal.SIGALRM, _alarm)
    signal.alarm(10)
    try:
        for call in (lambda: read_file(scratch), lambda: load_table(scratch, "grade")):
            try:
                call()
            except LabbenchError as exc:
                message = str(exc)
                assert message and "\n" not in message, repr(message)
    finally:
        signal.alarm(0)
        signal.signal(signal.SIGALRM, old)


def test_the_unmutated_bases_load():
    with tempfile.TemporaryDirectory() as folder:
        for k, data in enumerate(BASES):
            path = Path(folder) / f"base{k}.csv"
            path.write_bytes(data)
            table = load_table(path, "grade", ignore=["id"])
            assert table.n_rows == 6 and table.task == "multiclass", k
