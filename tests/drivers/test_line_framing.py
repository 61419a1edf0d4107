"""Tests for drivers.line_format, line_framing and line_parsing, and the pure parts of drivers.serial_lines: the
[source] table, cutting a byte stream into lines, reading lines into numbers, header lines, and the stream
checks (gaps, clock, garbage)."""

from __future__ import annotations

import functools
import math
import operator

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from drivers.base import LineStatus, RawBatch
from drivers.line_format import LineFormat
from drivers.line_framing import FramedLines, LineSplitter, xor8
from drivers.line_parsing import parse_lines
from drivers.serial_lines import LineParser, StreamWatch
from monitor.errors import ConfigError

OK, GARBAGE, FIELD_COUNT = LineStatus.OK, LineStatus.GARBAGE, LineStatus.FIELD_COUNT
BAD_NUMBER, CHECKSUM, PARTIAL, TOO_LONG = (LineStatus.BAD_NUMBER, LineStatus.CHECKSUM, LineStatus.PARTIAL,
                                           LineStatus.TOO_LONG)

# The [source] example of docs/serial-lines.md (our own invented rig).
EXAMPLE = {
    "driver": "serial_lines", "port": "/dev/ttyACM0", "baud": 115200, "parity": "none", "stop_bits": 1,
    "line_ending": "lf", "layout": "csv", "columns": ["t_ms", "seq", "P_tank", "P_feed", "T_tank", "flow", "load"],
    "header": False, "device_time_field": "t_ms", "device_time_unit": "ms", "sequence_field": "seq",
    "checksum": "none", "max_line_bytes": 512,
}
COLS6 = ("a", "b", "c", "d", "e", "f")


def fmt_of(**kw) -> LineFormat:
    kw.setdefault("columns", COLS6)
    return LineFormat(**kw)


def split_all(fmt: LineFormat, chunks: list[bytes], mid_stream: bool = False) -> FramedLines:
    splitter = LineSplitter(fmt, mid_stream=mid_stream)
    return FramedLines.concat([splitter.feed(c, float(i)) for i, c in enumerate(chunks)])


def parse_bytes(fmt: LineFormat, data: bytes) -> RawBatch:
    framed = split_all(fmt, [data])
    return parse_lines(framed.lines, framed.t_s, fmt, framed.status)


def nmea_checksum(body: bytes) -> int:
    """Independent of xor8: the NMEA 0183 rule, XOR of every character between '$' and '*' (from memory)."""
    return functools.reduce(operator.xor, body, 0)


def with_xor8(body: bytes) -> bytes:
    return body + b"*%02X" % nmea_checksum(body)


# ---------------------------------------------------------------- the [source] table

def test_example_table_reads():
    fmt = LineFormat.from_source_table(EXAMPLE, "rig.toml")
    assert fmt.columns == tuple(EXAMPLE["columns"])
    assert fmt.fields == ("P_tank", "P_feed", "T_tank", "flow", "load")
    assert fmt.device_time_scale_s == pytest.approx(1e-3)  # SI prefix milli = 1e-3 (SI Brochure)
    assert fmt.stop_bits == 1.0 and fmt.baud == 115200


def test_defaults_with_only_columns():
    fmt = LineFormat.from_source_table({"columns": ["a", "b"]})
    assert (fmt.layout, fmt.line_ending, fmt.checksum, fmt.max_line_bytes, fmt.port) == ("csv", "lf", "none", 512, None)


@pytest.mark.parametrize("key, value, expected_words", [
    ("baud", 0, "bits per second"),
    ("baud", "115200", "bits per second"),
    ("baud", True, "bits per second"),
    ("parity", "mark", "'none'"),
    ("stop_bits", 3, "1, 1.5 or 2"),
    ("line_ending", "\n", "'lf'"),
    ("layout", "json", "'csv'"),
    ("columns", [], "non-empty list"),
    ("columns", ["a", "a", "b"], "once each"),
    ("columns", ["a b", "c"], "no spaces"),
    ("columns", ["1", "c"], "not numbers"),
    ("columns", "a,b", "non-empty list"),
    ("header", "yes", "true or false"),
    ("device_time_field", "clock", "one of the columns"),
    ("device_time_unit", "min", "'s'"),
    ("sequence_field", "t_ms", "other than device_time_field"),
    ("sequence_modulo", 1, "at least 2"),
    ("checksum", "crc16", "'xor8'"),
    ("max_line_bytes", 4, "16 to 65536"),
    ("port", "", "non-empty"),
    ("driver", "modbus_rtu", "serial_lines"),
    ("baudrate", 9600, "no such key"),
])
def test_each_mistake_names_key_value_and_expectation(key, value, expected_words):
    table = dict(EXAMPLE, **{key: value})
    with pytest.raises(ConfigError) as info:
        LineFormat.from_source_table(table, "rig.toml")
    message = str(info.value)
    assert f"source.{key}" in message and repr(value) in message and expected_words in message
    assert message.startswith("rig.toml: ")


@pytest.mark.parametrize("table, key", [
    ({"layout": "csv"}, "source.columns"),  # no columns and no header
    ({"columns": ["t", "x"], "device_time_field": "t"}, "source.device_time_unit"),  # unit missing
    ({"columns": ["t", "x"], "device_time_unit": "ms"}, "source.device_time_unit"),  # unit without field
    ({"columns": ["n", "x"], "sequence_modulo": 256}, "source.sequence_modulo"),  # modulo without field
    ({"columns": ["t", "n"], "device_time_field": "t", "device_time_unit": "s", "sequence_field": "n"},
     "source.columns"),  # nothing left to measure
    ({"layout": "pairs", "header": True, "columns": ["x"]}, "source.header"),
    ({"layout": "pairs"}, "source.columns"),
])
def test_inconsistent_tables(table, key):
    with pytest.raises(ConfigError, match=key.replace(".", r"\.")):
        LineFormat.from_source_table(table)


def test_header_without_columns_is_allowed():
    fmt = LineFormat.from_source_table({"header": True, "device_time_field": "t", "device_time_unit": "us"})
    assert fmt.fields == () and fmt.device_time_scale_s == pytest.approx(1e-6)  # micro = 1e-6 (SI Brochure)


# ---------------------------------------------------------------- framing

def test_line_endings_give_the_same_lines():
    body = [b"1,2,3,4,5,6", b"7,8,9,10,11,12", b"-1,-2,-3,-4,-5,-6"]
    for ending, term in (("lf", b"\n"), ("crlf", b"\r\n"), ("cr", b"\r")):
        framed = split_all(fmt_of(line_ending=ending), [term.join(body) + term])
        assert framed.lines == body and list(framed.status) == [OK] * 3, ending
    # a device sending CRLF to a port set to lf or cr still gives clean lines
    assert split_all(fmt_of(line_ending="lf"), [b"1\r\n2\r\n"]).lines == [b"1", b"2"]
    assert split_all(fmt_of(line_ending="cr"), [b"1\r\n2\r\n"]).lines == [b"1", b"2"]


def test_crlf_cut_between_cr_and_lf():
    for ending in ("lf", "cr"):
        framed = split_all(fmt_of(line_ending=ending), [b"1,2\r", b"\n3,4\r", b"\n"])
        assert framed.lines == [b"1,2", b"3,4"], ending


def test_empty_lines_are_skipped():
    framed = split_all(fmt_of(), [b"\n\n1\n\n\n2\n\n"])
    assert framed.lines == [b"1", b"2"]


def test_first_fragment_after_opening_is_partial():
    framed = split_all(fmt_of(), [b"5,6\n1,2,3,4,5,6\n"], mid_stream=True)
    assert framed.lines == [b"5,6", b"1,2,3,4,5,6"] and list(framed.status) == [PARTIAL, OK]
    # an empty first fragment shows the stream was at a line boundary: nothing is lost
    framed = split_all(fmt_of(), [b"\n1,2,3,4,5,6\n"], mid_stream=True)
    assert framed.lines == [b"1,2,3,4,5,6"] and list(framed.status) == [OK]


def test_too_long_line_is_cut_and_the_next_survives():
    fmt = fmt_of(max_line_bytes=16)
    long_line = b"9" * 40
    for chunks in ([long_line + b"\n1,2\n"], [long_line[:10], long_line[10:30], long_line[30:] + b"\n1,", b"2\n"]):
        framed = split_all(fmt, chunks)
        assert framed.lines == [b"9" * 16, b"1,2"]
        assert list(framed.status) == [TOO_LONG, OK]
    # exactly max_line_bytes is fine, also with its CR before the LF arriving on its own
    framed = split_all(fmt, [b"x" * 16 + b"\r", b"\n"])
    assert framed.lines == [b"x" * 16] and list(framed.status) == [OK]


def test_flush_returns_the_cut_tail_as_partial():
    splitter = LineSplitter(fmt_of(), mid_stream=False)
    assert splitter.feed(b"1,2,3\n4,5", 1.0).lines == [b"1,2,3"]
    tail = splitter.flush(2.0)
    assert tail.lines == [b"4,5"] and list(tail.status) == [PARTIAL] and list(tail.t_s) == [2.0]
    assert splitter.flush(3.0).lines == []


def test_each_line_has_the_time_of_the_chunk_that_completed_it():
    splitter = LineSplitter(fmt_of(), mid_stream=False)
    first = splitter.feed(b"1,2\n3,", 10.0)
    second = splitter.feed(b"4\n5,6\n", 11.0)
    assert list(first.t_s) == [10.0] and list(second.t_s) == [11.0, 11.0]


# Byte streams rich in the bytes that matter to framing (CR, LF), plus arbitrary bytes.
stream_bytes = st.one_of(
    st.lists(st.sampled_from([b"\r", b"\n", b"\r\n", b"1", b",", b"x" * 7, b"\xff"]), max_size=120).map(b"".join),
    st.binary(max_size=300).map(lambda b: b.translate(bytes.maketrans(b"abcd", b"\r\n\r\n"))),
)


@pytest.mark.parametrize("ending", ["lf", "crlf", "cr"])
@pytest.mark.parametrize("mid_stream", [False, True])
def test_split_at_every_position(ending, mid_stream):
    stream = (b"7,8\r\n1,2,3\r\n\r\n\n4,5\r\r\n" + b"z" * 30 + b"\r\n\r6,7\n\n8\r" + b"y" * 17 + b"\n9,0")
    fmt = fmt_of(line_ending=ending, max_line_bytes=16)

    def run(chunks: list[bytes]) -> tuple[list[bytes], list[int]]:
        splitter = LineSplitter(fmt, mid_stream)
        framed = FramedLines.concat([splitter.feed(c, 0.0) for c in chunks] + [splitter.flush(0.0)])
        return framed.lines, list(framed.status)

    whole = run([stream])
    for p in range(len(stream) + 1):
        assert run([stream[:p], stream[p:]]) == whole, p
    assert run([stream[i:i + 1] for i in range(len(stream))]) == whole
    first = PARTIAL if mid_stream else OK
    if ending == "cr":  # a CR ends each line and one LF right after it is dropped; other LFs are content
        expected = ([b"7,8", b"1,2,3", b"\n4,5", b"z" * 16, b"6,7\n\n8", b"y" * 16],
                    [first, OK, OK, TOO_LONG, OK, TOO_LONG])
    else:  # an LF ends each line and one CR right before it is dropped; other CRs are content
        expected = ([b"7,8", b"1,2,3", b"4,5\r", b"z" * 16, b"\r6,7", b"8\r" + b"y" * 14, b"9,0"],
                    [first, OK, OK, TOO_LONG, OK, TOO_LONG, PARTIAL])
    assert whole == expected


@settings(max_examples=400, deadline=None)
@given(data=stream_bytes, cuts=st.lists(st.integers(0, 300), max_size=12),
       ending=st.sampled_from(["lf", "crlf", "cr"]), limit=st.sampled_from([16, 40, 512]),
       mid_stream=st.booleans())
def test_any_chunking_gives_the_same_lines(data, cuts, ending, limit, mid_stream):
    fmt = fmt_of(line_ending=ending, max_line_bytes=limit)
    points = sorted({c for c in cuts if c <= len(data)})
    chunks = [data[a:b] for a, b in zip([0] + points, points + [len(data)])]
    whole = LineSplitter(fmt, mid_stream)
    one = FramedLines.concat([whole.feed(data, 0.0), whole.flush(1.0)])
    cut = LineSplitter(fmt, mid_stream)
    many = FramedLines.concat([cut.feed(c, 0.0) for c in chunks] + [cut.flush(1.0)])
    assert many.lines == one.lines and list(many.status) == list(one.status)
    assert all(0 < len(line) <= limit for line in one.lines)


@settings(max_examples=200, deadline=None)
@given(lines=st.lists(st.binary(min_size=1, max_size=30).filter(lambda b: b"\n" not in b and b"\r" not in b),
                      max_size=20), cuts=st.lists(st.integers(0, 700), max_size=10))
def test_lines_come_back_as_sent(lines, cuts):
    data = b"".join(line + b"\r\n" for line in lines)
    points = sorted({c for c in cuts if c <= len(data)})
    framed = split_all(fmt_of(line_ending="crlf"), [data[a:b] for a, b in zip([0] + points, points + [len(data)])])
    assert framed.lines == lines and list(framed.status) == [OK] * len(lines)


# ---------------------------------------------------------------- reading numbers

def test_csv_values_and_statuses():
    data = (b"1,2,3,4,5,6\n"
            b"1.5e3, -2.25 ,+.5,7.,0,-0\n"
            b"1,2,3\n"  # too few fields
            b"1,2,3,4,5,6,7\n"  # too many
            b"1,2,x,4,5,6\n"  # one not a number
            b"1,,3,4,5,6\n"  # an empty field
            b"1,2,3,4,5, \n"  # a blank field at the end
            b"hello,world\n"  # text without numbers
            b"\x81\xfe\x07\x00\n"  # not text
            b"nan,inf,-inf,NaN,Infinity,1e400\n")
    raw = parse_bytes(fmt_of(), data)
    assert list(raw.status) == [OK, OK, FIELD_COUNT, FIELD_COUNT, BAD_NUMBER, BAD_NUMBER, BAD_NUMBER, GARBAGE,
                                GARBAGE, OK]
    assert raw.fields == COLS6
    np.testing.assert_array_equal(raw.values[0], [1, 2, 3, 4, 5, 6])
    np.testing.assert_array_equal(raw.values[1], [1500.0, -2.25, 0.5, 7.0, 0.0, 0.0])
    assert np.isnan(raw.values[2:9]).all()
    last = raw.values[9]
    assert np.isnan(last[0]) and np.isnan(last[3])
    assert list(last[[1, 2, 4, 5]]) == [math.inf, -math.inf, math.inf, math.inf]  # 1e400 overflows (IEEE 754)
    assert raw.lines[8] == b"\x81\xfe\x07\x00"  # the raw bytes are kept


def test_whitespace_values_and_statuses():
    data = b"1 2 3 4 5 6\n  1\t2  3 4\t\t5 6  \n1 2 3 4 5\n1 2 3 4 5 6 7\n1 2 3 four 5 6\n"
    raw = parse_bytes(fmt_of(layout="whitespace"), data)
    assert list(raw.status) == [OK, OK, FIELD_COUNT, FIELD_COUNT, BAD_NUMBER]
    np.testing.assert_array_equal(raw.values[:2], [[1, 2, 3, 4, 5, 6]] * 2)


def test_pairs():
    fmt = fmt_of(layout="pairs", columns=("t", "P_tank", "load"), device_time_field="t", device_time_unit="s",
                 sequence_field=None)
    data = (b"t=1.5,P_tank=3.25,load=12\n"
            b"load=7 P_tank=2 extra=9\n"  # any order, spaces, an unknown name skipped
            b"P_tank=4\n"  # absent names stay NaN
            b"P_tank=x,load=1\n"
            b"P_tank=1,P_tank=2\n"  # a name twice
            b"P_tank=1,oops\n"  # a field that is no pair
            b"other=5\n"  # none of ours
            b"no pairs here\n")
    raw = parse_bytes(fmt, data)
    assert list(raw.status) == [OK, OK, OK, BAD_NUMBER, FIELD_COUNT, FIELD_COUNT, FIELD_COUNT, GARBAGE]
    assert raw.fields == ("P_tank", "load")
    np.testing.assert_array_equal(raw.values[:2], [[3.25, 12], [2, 7]])
    assert raw.values[2, 0] == 4 and np.isnan(raw.values[2, 1])
    assert raw.device_time_s[0] == 1.5 and np.isnan(raw.device_time_s[1])


@pytest.mark.parametrize("unit, seconds_per_count", [("s", 1.0), ("ms", 1e-3), ("us", 1e-6)])  # SI prefixes
def test_device_time_units(unit, seconds_per_count):
    fmt = fmt_of(columns=("t", "x"), device_time_field="t", device_time_unit=unit)
    raw = parse_bytes(fmt, b"1500,1\n2500,2\nbad,3\n")
    assert raw.fields == ("x",)
    np.testing.assert_allclose(raw.device_time_s[:2], [1500 * seconds_per_count, 2500 * seconds_per_count])
    assert raw.status[2] == BAD_NUMBER and np.isnan(raw.device_time_s[2])


def test_sequence_numbers():
    fmt = fmt_of(columns=("n", "x"), sequence_field="n")
    raw = parse_bytes(fmt, b"7,1\n8,2\n8.5,3\n-1,4\nnan,5\n9007199254740992,6\n")
    assert list(raw.status) == [OK, OK, BAD_NUMBER, BAD_NUMBER, BAD_NUMBER, OK]
    assert list(raw.sequence) == [7, 8, -1, -1, -1, 2**53]
    assert raw.sequence.dtype == np.int64


def test_nmea_example_sentence_checksum():
    # NMEA 0183 GGA example as widely quoted (from memory): checksum 47 over the text between '$' and '*'
    sentence = b"$GPGGA,123519,4807.038,N,01131.000,E,1,08,0.9,545.4,M,46.9,M,,*47"
    body = sentence[1: sentence.index(b"*")]
    assert xor8(body) == 0x47 == nmea_checksum(body)


@settings(max_examples=200, deadline=None)
@given(st.binary(max_size=200))
def test_xor8_matches_a_plain_reduce(data):
    assert xor8(data) == nmea_checksum(data)


def test_xor8_lines_good_and_bad():
    fmt = fmt_of(checksum="xor8", columns=("a", "b", "c"))
    good = with_xor8(b"1.5,2,3")
    lower = b"$" + good.lower()  # '$' as NMEA starts a sentence; lower-case hex digits
    flipped = good[:-1] + (b"0" if good[-1:] != b"0" else b"1")
    data = b"\n".join([good, lower, flipped, b"1.5,2,3", b"1.5,2,3*4", b"1.5,2,3*ZZ", with_xor8(b"1,2")]) + b"\n"
    raw = parse_bytes(fmt, data)
    assert list(raw.status) == [OK, OK, CHECKSUM, CHECKSUM, CHECKSUM, CHECKSUM, FIELD_COUNT]
    np.testing.assert_array_equal(raw.values[:2], [[1.5, 2, 3]] * 2)


def test_lines_kept_raw_with_their_framing_status():
    fmt = fmt_of(columns=("a", "b"))
    raw = parse_lines([b"1,2", b"3,4", b"5,6"], np.array([1.0, 2.0, 3.0]), fmt,
                      np.array([PARTIAL, OK, TOO_LONG], dtype=np.uint8))
    assert list(raw.status) == [PARTIAL, OK, TOO_LONG] and raw.lines == [b"1,2", b"3,4", b"5,6"]
    assert np.isnan(raw.values[[0, 2]]).all() and list(raw.values[1]) == [3, 4]
    assert list(raw.t_s) == [1.0, 2.0, 3.0]


def test_empty_input():
    raw = parse_lines([], np.empty(0), fmt_of())
    assert len(raw) == 0 and raw.values.shape == (0, 6)


def test_a_bad_line_in_a_big_batch_leaves_the_others():
    good = [b"%d,2,3,4,5,6" % i for i in range(5000)]
    lines = list(good)
    lines[1234] = b"1,2,3.4.5,4,5,6"  # passes the byte checks, fails the conversion
    lines[4321] = b"1,2,--3,4,5,6"
    raw = parse_lines(lines, np.zeros(len(lines)), fmt_of())
    bad = np.flatnonzero(raw.status != OK)
    assert list(bad) == [1234, 4321] and (raw.status[bad] == BAD_NUMBER).all()
    ok = raw.status == OK
    np.testing.assert_array_equal(raw.values[ok, 0], np.arange(5000)[ok])


def reference_row(line: bytes, csv: bool, ncols: int) -> tuple[int, list[float] | None]:
    """Python's own float() (correctly rounded decimal-to-binary conversion) applied token by token."""
    text = line.decode("ascii")
    tokens = [t.strip() for t in text.split(",")] if csv else text.split()

    def number(t: str) -> float | None:
        try:
            return float(t) if t and "_" not in t else None
        except ValueError:
            return None

    values = [number(t) for t in tokens]
    if all(v is None for v in values):
        return GARBAGE, None
    if len(tokens) != ncols:
        return FIELD_COUNT, None
    if any(v is None for v in values):
        return BAD_NUMBER, None
    return OK, values


number_token = st.one_of(
    st.floats(allow_nan=False, allow_infinity=False).map(repr),
    st.integers(-10**20, 10**20).map(str),
    st.text(alphabet="0123456789.+-eE", min_size=1, max_size=6),
    st.sampled_from(["nan", "inf", "-inf", "", " ", "1e", ".", "-", "0x1", "1_0", "12 3"]),
)


@settings(max_examples=300, deadline=None)
@given(rows=st.lists(st.lists(number_token, min_size=1, max_size=5), min_size=1, max_size=25),
       csv=st.booleans(), pad=st.sampled_from(["", " ", "\t", "  "]))
def test_batch_reading_agrees_with_float_line_by_line(rows, csv, pad):
    joiner = (pad + "," + pad) if csv else (pad + " ")
    lines = [joiner.join(r).encode() for r in rows]
    lines = [line for line in lines if line]
    fmt = fmt_of(layout="csv" if csv else "whitespace", columns=("a", "b", "c"))
    raw = parse_lines(lines, np.zeros(len(lines)), fmt)
    for i, line in enumerate(lines):
        status, values = reference_row(line, csv, 3)
        assert raw.status[i] == status, line
        if values is not None:
            np.testing.assert_array_equal(raw.values[i], values)


@settings(max_examples=200, deadline=None)
@given(garbage=st.lists(st.binary(min_size=1, max_size=80).filter(lambda b: b"\n" not in b and b"\r" not in b),
                        max_size=15),
       values=st.lists(st.lists(st.floats(allow_nan=False, allow_infinity=False, width=32), min_size=6,
                                max_size=6), min_size=1, max_size=15),
       data=st.data())
def test_random_garbage_never_raises_and_good_lines_survive(garbage, values, data):
    good = [",".join(repr(v) for v in row).encode() for row in values]
    lines = list(good) + list(garbage)
    order = data.draw(st.permutations(range(len(lines))))
    stream = b"".join(lines[k] + b"\n" for k in order)
    cuts = sorted(data.draw(st.lists(st.integers(0, len(stream)), max_size=8)))
    fmt = fmt_of(max_line_bytes=200)  # above any line drawn here
    framed = split_all(fmt, [stream[a:b] for a, b in zip([0] + cuts, cuts + [len(stream)])])
    raw = parse_lines(framed.lines, framed.t_s, fmt, framed.status)
    assert len(raw) == len(lines)  # every line is one row: none is empty, none holds a terminator
    for row, k in enumerate(order):
        if k < len(good):
            assert raw.status[row] == OK and raw.lines[row] == good[k]
            np.testing.assert_array_equal(raw.values[row], values[k])


# ---------------------------------------------------------------- header lines (LineParser)

def framed_of(fmt: LineFormat, data: bytes) -> FramedLines:
    return split_all(fmt, [data])


def test_header_gives_the_columns():
    fmt = LineFormat(header=True, device_time_field="t_ms", device_time_unit="ms")
    parser = LineParser(fmt)
    raw = parser.parse(framed_of(fmt, b"1,2,3\nt_ms,P_tank,load\n10,2.5,7\n20,2.75,8\n"))
    assert raw.fields == ("P_tank", "load") == parser.fields
    assert list(raw.status) == [FIELD_COUNT, OK, OK]  # before the header nothing can be read
    np.testing.assert_array_equal(raw.values[1:], [[2.5, 7], [2.75, 8]])
    np.testing.assert_allclose(raw.device_time_s[1:], [0.010, 0.020])
    kinds = [e.kind for e in raw.events]
    assert kinds == ["header", "bad_line"] and raw.events[0].detail == "t_ms,P_tank,load"


def test_a_later_header_moves_the_columns_but_keeps_the_fields():
    fmt = LineFormat(header=True, layout="whitespace")
    parser = LineParser(fmt)
    parser.parse(framed_of(fmt, b"x y\n1 2\n"))
    raw = parser.parse(framed_of(fmt, b"y x\n5 6\nready now\n"))  # reordered; a banner lacks the names
    assert raw.fields == ("x", "y")
    assert list(raw.status) == [OK, GARBAGE] and list(raw.values[0]) == [6, 5]
    assert [e.kind for e in raw.events] == ["header", "bad_line"]


def test_header_with_columns_given_picks_the_wanted_ones():
    fmt = LineFormat(header=True, columns=("b", "a"))
    raw = LineParser(fmt).parse(framed_of(fmt, b"2,1\na,b,c\n1,2,3\n"))
    assert raw.fields == ("b", "a")
    np.testing.assert_array_equal(raw.values, [[2, 1], [2, 1]])  # columns in rig order until a header says


# ---------------------------------------------------------------- stream checks (StreamWatch)

def raw_with(sequence=None, device_time_s=None, status=None, n=None) -> RawBatch:
    n = n if n is not None else len(sequence if sequence is not None else device_time_s)
    return RawBatch(t_s=np.arange(n, dtype=float), lines=[b""] * n,
                    status=np.zeros(n, np.uint8) if status is None else np.asarray(status, np.uint8), fields=(),
                    values=np.empty((n, 0)),
                    device_time_s=None if device_time_s is None else np.asarray(device_time_s, float),
                    sequence=None if sequence is None else np.asarray(sequence, np.int64))


def test_sequence_gaps_are_counted_across_batches():
    watch = StreamWatch()
    assert watch.check(raw_with(sequence=[1, 2, 3]), 0.0) == []
    events = watch.check(raw_with(sequence=[6, 7, 10]), 1.0)  # 4, 5 and 8, 9 missing
    assert [e.kind for e in events] == ["gap"] and events[0].detail.startswith("4 lines missing in 2 gaps")
    assert watch.check(raw_with(sequence=[11, -1, 12]), 2.0) == []  # -1: a line without a number


def test_sequence_wrap_with_modulo():
    watch = StreamWatch(sequence_modulo=256)
    assert watch.check(raw_with(sequence=[254, 255, 0, 1]), 0.0) == []
    events = watch.check(raw_with(sequence=[3]), 1.0)
    assert events[0].kind == "gap" and events[0].detail.startswith("1 lines missing")
    without = StreamWatch()
    assert [e.kind for e in without.check(raw_with(sequence=[255, 0]), 0.0)] == ["sequence_reset"]


def test_device_clock_going_backwards():
    watch = StreamWatch()
    assert watch.check(raw_with(device_time_s=[1.0, 1.1]), 0.0) == []
    events = watch.check(raw_with(device_time_s=[0.85, 0.9, 0.4]), 1.0)
    assert [e.kind for e in events] == ["clock_backwards"]
    assert "2 times" in events[0].detail and "0.5 s" in events[0].detail


def test_mostly_garbage_is_reported_once_per_episode():
    watch = StreamWatch(garbage_window_s=1.0, garbage_min_lines=10)
    bad = raw_with(status=[GARBAGE] * 6 + [OK] * 4, n=10)
    assert [e.kind for e in watch.check(bad, 0.0)] == ["mostly_garbage"]
    assert watch.check(bad, 0.5) == []  # still the same episode
    assert watch.check(raw_with(status=[OK] * 40, n=40), 0.9) == []  # 12 of 60 in the window: cleared
    assert [e.kind for e in watch.check(bad, 5.0)] == ["mostly_garbage"]  # the old reads left the window
    assert StreamWatch().check(raw_with(status=[GARBAGE] * 5 + [OK] * 5, n=10), 0.0) == []  # half is not more
