"""Measurement CSV files: good files parse; malformed ones give one line naming file, row, column."""
import numpy as np
import pytest

from ventsource.common.errors import InputError
from ventsource.workflow.measurements import read_measurements

GOOD = ("id,time,SO2/CO2,H2S/SO2,H2O/CO2,sigma SO2/CO2\n"
        "A-1,2026-03-14T10:20:00Z,0.61,0.21,25.0,\n"
        "A-2,2026-03-15T00:00Z,0.35,<0.05,31.2,0.25\n"
        "A-3,2026-03-16T11:45:00-05:00,0.28,0.40,,\n")


def write(tmp_path, text, name="m.csv", raw=None):
    p = tmp_path / name
    if raw is not None:
        p.write_bytes(raw)
    else:
        p.write_text(text, encoding="utf-8")
    return str(p)


def test_good_file(tmp_path):
    s = read_measurements(write(tmp_path, GOOD), default_sigma=0.15)
    assert s.ids == ["A-1", "A-2", "A-3"]
    assert s.ratio_names == ("SO2/CO2", "H2S/SO2", "H2O/CO2")
    m2 = s.measurements[1]
    assert m2.censoring.tolist() == [0, -1, 0]           # "<0.05" is an upper limit
    assert m2.values[1] == 0.05                           # kept as the limit of a censored term
    assert m2.relative_sigma.tolist() == [0.25, 0.15, 0.15]
    assert np.isnan(s.measurements[2].values[2])          # missing stays missing


def test_times_one_rule_converted_to_utc(tmp_path):
    # ISO 8601 / RFC 3339: local time = UTC + offset (common practice, no source)
    text = ("id,time,SO2/CO2\n"
            "a,2026-03-14T10:20-05:00,0.5\n"        # minutes only, with an offset
            "b,2026-03-14T10:20:00-05:00,0.5\n"     # the same instant with seconds
            "c,2026-03-14T15:20:00Z,0.5\n"
            "d,2026-03-15T00:20:00.75+09:00,0.5\n"  # fraction dropped; previous day in UTC
            "e,2024-02-29T23:59:59+00:00,0.5\n")
    s = read_measurements(write(tmp_path, text))
    assert [str(t) for t in s.times] == ["2026-03-14T15:20:00"] * 3 + ["2026-03-14T15:20:00",
                                                                          "2024-02-29T23:59:59"]
    assert s.times.dtype == np.dtype("datetime64[s]")


def test_identifiers_with_quotes_and_commas_are_kept(tmp_path):
    text = 'id,time,SO2/CO2\n"say ""hi"", then",2026-01-01T00:00:00Z,0.5\nplain,2026-01-01T00:00:00Z,0.5\n'
    s = read_measurements(write(tmp_path, text))
    assert s.ids == ['say "hi", then', "plain"]


def test_bom_is_accepted(tmp_path):
    s = read_measurements(write(tmp_path, None, raw=b"\xef\xbb\xbf" + GOOD.encode()))
    assert len(s) == 3


BAD = {
    "empty": ("", "empty"),
    "header only": ("id,time,SO2/CO2\n", "no data rows"),
    "no id column": ("time,SO2/CO2\n2026-01-01T00:00:00Z,0.5\n", "column 'id'"),
    "no time column": ("id,SO2/CO2\nA,0.5\n", "column 'time'"),
    "no ratio column": ("id,time\nA,2026-01-01\n", "no ratio columns"),
    "unknown species": ("id,time,SO2/XX\nA,2026-01-01T00:00:00Z,0.5\n", "column 'SO2/XX'"),
    "text in number": ("id,time,SO2/CO2\nA,2026-01-01T00:00:00Z,abc\n", "row 2, column 'SO2/CO2'"),
    "negative ratio": ("id,time,SO2/CO2\nA,2026-01-01T00:00:00Z,-0.5\n", "positive"),
    "zero ratio": ("id,time,SO2/CO2\nA,2026-01-01T00:00:00Z,0\n", "positive"),
    "bad time": ("id,time,SO2/CO2\nA,yesterday,0.5\n", "column 'time'"),
    "duplicate id": ("id,time,SO2/CO2\nA,2026-01-01T00:00:00Z,0.5\nA,2026-01-02T00:00:00Z,0.6\n", "duplicate identifier"),
    "semicolon delimiter": ("id;time;SO2/CO2\nA;2026-01-01T00:00:00Z;0.5\n", "delimiter"),
    "tab delimiter": ("id\ttime\tSO2/CO2\nA\t2026-01-01T00:00:00Z\t0.5\n", "delimiter"),
    "short row": ("id,time,SO2/CO2,H2S/SO2\nA,2026-01-01T00:00:00Z,0.5\n", "row 2"),
    "all missing": ("id,time,SO2/CO2\nA,2026-01-01T00:00:00Z,\n", "every ratio is missing"),
    "empty id": ("id,time,SO2/CO2\n,2026-01-01T00:00:00Z,0.5\n", "column 'id'"),
    "bad sigma": ("id,time,SO2/CO2,sigma SO2/CO2\nA,2026-01-01T00:00:00Z,0.5,x\n", "column 'sigma SO2/CO2'"),
    "negative sigma": ("id,time,SO2/CO2,sigma SO2/CO2\nA,2026-01-01T00:00:00Z,0.5,-1\n", "relative 1-sigma"),
    "sigma for absent ratio": ("id,time,SO2/CO2,sigma H2S/SO2\nA,2026-01-01T00:00:00Z,0.5,0.1\n", "not a ratio column"),
    "duplicate column": ("id,time,SO2/CO2,SO2/CO2\nA,2026-01-01T00:00:00Z,0.5,0.5\n", "appears twice"),
    "time without offset": ("id,time,SO2/CO2\nA,2026-01-01T10:00:00,0.5\n", "with 'Z' or a UTC offset"),
    "infinite ratio": ("id,time,SO2/CO2\nA,2026-01-01T00:00:00Z,inf\n", "positive finite"),
    "time NaT": ("id,time,SO2/CO2\nA,NaT,0.5\n", "column 'time'"),
    "time now": ("id,time,SO2/CO2\nA,now,0.5\n", "column 'time'"),
    "time today": ("id,time,SO2/CO2\nA,today,0.5\n", "column 'time'"),
    "time basic date": ("id,time,SO2/CO2\nA,20260314,0.5\n", "column 'time'"),
    "time date only": ("id,time,SO2/CO2\nA,2026-03-14,0.5\n", "column 'time'"),
    "time month 13": ("id,time,SO2/CO2\nA,2026-13-01T00:00Z,0.5\n", "month must be in 1..12"),
    "time Feb 30": ("id,time,SO2/CO2\nA,2026-02-30T00:00Z,0.5\n", "day is out of range"),
    "time hour 24": ("id,time,SO2/CO2\nA,2026-02-03T24:00Z,0.5\n", "hour must be in 0..23"),
    "time offset 25 h": ("id,time,SO2/CO2\nA,2026-02-03T10:00+25:00,0.5\n", "offset out of range"),
    "id with newline": ('id,time,SO2/CO2\n"A\nB",2026-01-01T00:00:00Z,0.5\n', "U+000A"),
    "id with NUL": ("id,time,SO2/CO2\nA\x00B,2026-01-01T00:00:00Z,0.5\n", "U+0000"),
    "id with tab": ("id,time,SO2/CO2\nA\tB,2026-01-01T00:00:00Z,0.5\n", "U+0009"),
    "id with carriage return": ('id,time,SO2/CO2\n"A\rB",2026-01-01T00:00:00Z,0.5\n', "U+000D"),
    "quote left open": ('id,time,SO2/CO2\n"A,2026-01-01T00:00:00Z,0.5\n', "row"),
    "censor without number": ("id,time,SO2/CO2\nA,2026-01-01T00:00:00Z,<\n", "not a number"),
}


@pytest.mark.parametrize("case", sorted(BAD))
def test_malformed_files_give_one_line(tmp_path, case):
    text, needle = BAD[case]
    path = write(tmp_path, text)
    with pytest.raises(InputError) as err:
        read_measurements(path)
    msg = str(err.value)
    assert msg.startswith(path + ":"), msg
    assert needle in msg, msg
    assert "\n" not in msg


def test_not_utf8_and_missing_file(tmp_path):
    with pytest.raises(InputError, match="not UTF-8"):
        read_measurements(write(tmp_path, None, raw=b"id,time,SO2/CO2\nA,2026,\xff\xfe\n"))
    with pytest.raises(InputError, match="file not found"):
        read_measurements(str(tmp_path / "nope.csv"))


def test_per_column_default_sigma(tmp_path):
    # precedence: sigma cell > per-column default > fallback "*"
    s = read_measurements(write(tmp_path, GOOD), default_sigma={"H2O/CO2": 0.3, "*": 0.1})
    assert s.measurements[0].relative_sigma.tolist() == [0.1, 0.1, 0.3]
    assert s.measurements[1].relative_sigma.tolist() == [0.25, 0.1, 0.3]
    with pytest.raises(InputError, match="not a ratio column"):
        read_measurements(write(tmp_path, GOOD), default_sigma={"CO/CO2": 0.3})


@pytest.mark.parametrize("header, why", [
    ("SO2/CO2,SO2 / CO2", "same ratio as column 'SO2/CO2'"),
    ("SO2/CO2,CO2/SO2", "inverse of column 'SO2/CO2'"),
    ("SO2/SO2,H2S/SO2", "a gas to itself"),
    ("ST/CO2,SO2+H2S/CO2", "same ratio as column 'ST/CO2'"),   # ST = SO2 + H2S by definition
])
def test_a_ratio_counted_twice_is_refused(tmp_path, header, why):
    # one measurement entering the likelihood twice would halve its error (common practice, no source)
    p = write(tmp_path, f"id,time,{header}\na,2026-03-14T10:20:00Z,0.5,0.4\n")
    with pytest.raises(InputError, match="row 1") as exc:
        read_measurements(p)
    assert why in str(exc.value)


@pytest.mark.parametrize("cell", ["0_70351", "\uff11\uff12", "\u0663", "0x10", "1,5"])
def test_only_plain_ascii_numbers_are_read(tmp_path, cell):
    # Python's float() reads '0_70351' as 70351 and full-width or Arabic-Indic digits as numbers
    p = write(tmp_path, f'id,time,SO2/CO2,H2S/SO2\na,2026-03-14T10:20:00Z,"{cell}",0.4\n')
    with pytest.raises(InputError, match=r"row 2, column 'SO2/CO2'.*not a number"):
        read_measurements(p)


def test_sigma_cells_take_plain_numbers_only(tmp_path):
    p = write(tmp_path, "id,time,SO2/CO2,sigma SO2/CO2\na,2026-03-14T10:20:00Z,0.5,0_2\n")
    with pytest.raises(InputError, match=r"row 2, column 'sigma SO2/CO2'"):
        read_measurements(p)


@pytest.mark.parametrize("cell", ["NA", "nan", "N/A", "", "1.5e-1", "+.25", "2."])
def test_missing_markers_and_plain_numbers_still_read(tmp_path, cell):
    p = write(tmp_path, f"id,time,SO2/CO2,H2S/SO2\na,2026-03-14T10:20:00Z,{cell},0.4\n")
    v = read_measurements(p).measurements[0].values[0]
    assert np.isnan(v) if cell.upper() in ("NA", "NAN", "N/A", "") else v == float(cell)
