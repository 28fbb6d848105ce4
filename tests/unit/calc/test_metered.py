"""Tests of server.calc.metered: existing load from metered interval demand (NEC 220.87).

Sources: NFPA 70-2023 (National Electrical Code) 220.87, from memory: existing load = maximum
demand over one year × 125 %; Exception: at least 30 days of 15-minute maximum demand on the
highest loaded phase when a year of data is not available.  kVA = kW / pf is the definition of
power factor (common practice).  America/Chicago daylight-saving dates for 2023 (2023-03-12
02:00 → 03:00, 2023-11-05 02:00 → 01:00) from the IANA tz database shipped with Python.
"""

from __future__ import annotations

import random
from datetime import UTC, datetime, timedelta
from pathlib import Path
from zoneinfo import ZoneInfo

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from server.calc.errors import MeteredDataError
from server.calc.metered import (
    Basis,
    analyze_csv,
    analyze_readings,
    daily_peaks,
    parse_timestamp,
)
from tests.helpers import assert_close

CHICAGO = ZoneInfo("America/Chicago")


def _csv(header: str, rows: list[str]) -> str:
    return header + "\n" + "\n".join(rows) + "\n"


def _series(start: datetime, n: int, step_min: int = 15) -> list[datetime]:
    return [start + timedelta(minutes=step_min * i) for i in range(n)]


def _year_kva(peak_index: int, peak_kva: float, seed: int = 3) -> tuple[str, list[datetime]]:
    """35,040 rows of 15-minute kVA (invented load shape) with one planted peak."""
    rnd = random.Random(seed)
    stamps = _series(datetime(2023, 1, 1), 35_040)
    rows = []
    for i, t in enumerate(stamps):
        v = peak_kva if i == peak_index else round(50 + 40 * rnd.random(), 2)
        rows.append(f"{t:%Y-%m-%d %H:%M},{v}")
    return _csv("timestamp,kVA", rows), stamps


# --------------------------------------------------------------------------- 220.87 one year


def test_year_of_15_minute_data_planted_peak() -> None:
    text, stamps = _year_kva(peak_index=19_000, peak_kva=212.5)
    r = analyze_csv(text)
    assert r.rows == 35_040 and r.readings == 35_040
    assert r.interval_minutes == 15
    assert r.gaps == 0 and r.duplicates == 0 and r.dst_repeats == 0
    assert r.first == stamps[0] and r.last == stamps[-1]
    assert_close(r.coverage_days, 365.0, what="coverage")
    assert r.peak_kva == 212.5
    assert r.peak_at == stamps[19_000] == datetime(2023, 7, 17, 22, 0)
    # NFPA 70-2023 220.87, from memory: existing load = maximum demand over one year × 125 %.
    assert r.basis == Basis.ONE_YEAR
    assert_close(r.existing_load_kva, 1.25 * 212.5, what="220.87 existing load")
    assert r.conversion is None  # kVA needs no power factor
    assert len(r.daily_peaks) == 365
    assert max(d.peak_kva for d in r.daily_peaks) == 212.5
    assert daily_peaks(r)[0][0] == "2023-01-01"
    js = r.to_json()
    for key in ("rows", "interval_minutes", "gaps", "duplicates", "peak_kva", "peak_at", "existing_load_kva"):
        assert key in js
    assert js["peak_at"] == "2023-07-17T22:00:00"
    assert js["existing_load_kva"] == pytest.approx(265.625)


def test_year_same_result_through_row_by_row_reader() -> None:
    """A quoted field sends the file through the row-by-row reader: identical numbers."""
    text, _ = _year_kva(peak_index=500, peak_kva=300.0)
    fast = analyze_csv(text)
    slow = analyze_csv(text.replace("timestamp,kVA", '"timestamp","kVA"', 1))
    assert fast.to_json() == slow.to_json() | {"units_note": fast.units_note}
    # Rows in reverse order take the sorting path (daily peaks by lookup, not by arithmetic).
    head, *rows = text.rstrip("\n").split("\n")
    backwards = analyze_csv("\n".join([head, *reversed(rows)]))
    assert backwards.daily_peaks == fast.daily_peaks
    assert backwards.peak_at == fast.peak_at and backwards.gaps == 0


# --------------------------------------------------------------------------- data problems


def test_gaps_duplicates_dst_repeat_and_bad_row_chicago() -> None:
    """Naive local times in America/Chicago across the 2023 fall-back night."""
    start = datetime(2023, 11, 4, 5, 0, tzinfo=UTC)  # 2023-11-04 00:00 CDT
    stamps = [(start + timedelta(minutes=15 * i)).astimezone(CHICAGO).replace(tzinfo=None) for i in range(2 * 96 + 4)]
    assert stamps.count(datetime(2023, 11, 5, 1, 15)) == 2  # the meter logs local 01:00-01:45 twice
    # Distinct values (index-based) so the repeated hour is told apart from a duplicate.
    rows = [f"{t:%Y-%m-%d %H:%M},{10 + (i % 97) / 10:.1f}" for i, t in enumerate(stamps)]
    del rows[20:23]  # three missing intervals
    rows.insert(40, rows[40])  # one exact duplicate row
    rows.insert(50, "2023-11-04 13:37,not-a-number")  # one bad row
    text = _csv("Timestamp,kVA", rows)
    r = analyze_csv(text, tz="America/Chicago")
    assert r.gaps == 3
    assert r.duplicates == 1
    assert r.dst_repeats == 4  # 01:00, 01:15, 01:30, 01:45 on 2023-11-05
    assert len(r.bad_rows) == 1
    assert r.bad_rows[0].line == 52  # header on line 1; data index 50 is line 52
    assert "not a number" in r.bad_rows[0].reason and "kVA" in r.bad_rows[0].reason
    assert r.readings == len(stamps) - 3
    assert r.peak_at.tzinfo is not None
    assert_close(r.coverage_days, (len(stamps)) / 96)


def test_fall_back_hour_second_pass_is_not_a_duplicate() -> None:
    """2023-11-05 in America/Chicago: 01:00-01:45 appears twice (CDT then CST)."""
    utc0 = datetime(2023, 11, 5, 5, 0, tzinfo=UTC)  # 00:00 CDT
    stamps = [(utc0 + timedelta(minutes=15 * i)).astimezone(CHICAGO) for i in range(16)]
    values = [20.0 + i for i in range(16)]
    values[8] = 99.0  # the 01:00 of the second pass (CST)
    rows = [f"{t.replace(tzinfo=None):%Y-%m-%d %H:%M},{v}" for t, v in zip(stamps, values, strict=True)]
    r = analyze_csv(_csv("timestamp,kW", rows), tz="America/Chicago", pf=1.0)
    assert r.dst_repeats == 4 and r.duplicates == 0 and r.gaps == 0
    assert r.readings == 16
    assert r.peak_kva == 99.0
    assert r.peak_at.isoformat() == "2023-11-05T01:00:00-06:00"  # the CST pass (fold=1)
    # Without a zone the same file is read at a fixed offset: the repeats are duplicates.
    r2 = analyze_csv(_csv("timestamp,kW", rows), pf=1.0)
    assert r2.duplicates == 4 and r2.dst_repeats == 0
    assert any("fixed offset" in n for n in r2.notes)


def test_spring_forward_hour_is_not_a_gap_and_a_time_inside_it_is_bad() -> None:
    utc0 = datetime(2023, 3, 12, 6, 0, tzinfo=UTC)  # 00:00 CST
    stamps = [(utc0 + timedelta(minutes=15 * i)).astimezone(CHICAGO).replace(tzinfo=None) for i in range(16)]
    assert datetime(2023, 3, 12, 2, 0) not in stamps
    rows = [f"{t:%Y-%m-%d %H:%M},{10 + i}" for i, t in enumerate(stamps)]
    r = analyze_csv(_csv("timestamp,kVA", rows), tz="America/Chicago")
    assert r.gaps == 0 and r.dst_repeats == 0 and not r.bad_rows
    rows.insert(8, "2023-03-12 02:30,50")
    r = analyze_csv(_csv("timestamp,kVA", rows), tz="America/Chicago")
    assert [b.line for b in r.bad_rows] == [10]
    assert "does not exist in America/Chicago" in r.bad_rows[0].reason
    with pytest.raises(MeteredDataError) as exc:
        analyze_csv(_csv("timestamp,kVA", rows), tz="America/Chicago", strict=True)
    assert exc.value.bad_rows[0][0] == 10


def test_offset_timestamps_across_daylight_saving() -> None:
    utc0 = datetime(2023, 11, 5, 5, 0, tzinfo=UTC)
    stamps = [(utc0 + timedelta(minutes=15 * i)).astimezone(CHICAGO) for i in range(16)]
    rows = [f"{t.isoformat()},{10 + i}" for i, t in enumerate(stamps)]
    r = analyze_csv(_csv("timestamp,kVA", rows))
    assert r.duplicates == 0 and r.gaps == 0 and r.readings == 16
    assert r.peak_at == stamps[-1]


def test_duplicates_keep_the_higher_reading() -> None:
    stamps = _series(datetime(2024, 5, 1), 8)
    rows = [f"{t:%Y-%m-%d %H:%M},{10}" for t in stamps]
    rows.append(f"{stamps[3]:%Y-%m-%d %H:%M},40")  # conflicting duplicate, later in the file
    r = analyze_csv(_csv("timestamp,kVA", rows))
    assert r.duplicates == 1 and r.readings == 8 and r.rows == 9
    assert r.peak_kva == 40 and r.peak_at == stamps[3]


def test_bad_rows_listed_with_line_numbers_and_strict_refuses() -> None:
    rows = [f"{t:%Y-%m-%d %H:%M},{10 + i}" for i, t in enumerate(_series(datetime(2024, 5, 1), 10))]
    rows[2] = "2024-05-01 00:30,"  # empty value → line 4
    rows[5] = "yesterday noon,12"  # bad timestamp → line 7
    rows[7] = "2024-05-01 01:45,12,13"  # extra field → line 9
    rows[8] = "2024-05-01 02:00,-4"  # negative → line 10
    text = _csv("timestamp,kVA", rows)
    r = analyze_csv(text)
    assert [(b.line) for b in r.bad_rows] == [4, 7, 9, 10]
    reasons = [b.reason for b in r.bad_rows]
    assert "empty" in reasons[0]
    assert "timestamp 'yesterday noon' not understood" in reasons[1]
    assert "3 fields where the header has 2" in reasons[2]
    assert "negative" in reasons[3]
    assert r.rows == 6
    with pytest.raises(MeteredDataError) as exc:
        analyze_csv(text, strict=True, name="site.csv")
    assert "site.csv" in str(exc.value) and "refused (strict)" in str(exc.value)
    assert [line for line, _ in exc.value.bad_rows] == [4, 7, 9, 10]


def test_multiline_quoted_record_keeps_physical_line_numbers() -> None:
    text = 'timestamp,kVA,remark\n2024-01-01 00:00,5,"two\nlines"\n2024-01-01 00:15,x,ok\n2024-01-01 00:30,6,ok\n'
    r = analyze_csv(text)
    assert [b.line for b in r.bad_rows] == [4]


@pytest.mark.parametrize(
    ("content", "fragment"),
    [
        ("", "empty"),
        ("   \n\n", "empty"),
        ("name,colour\nfoo,red\n", "no usable columns"),
        ("timestamp,kWh\n2024-01-01 00:00,4\n", "not demand"),
        ("timestamp,kVA\n", "no usable readings"),
        ("timestamp,kVA\n2024-01-01 00:00,x\n2024-01-01 00:15,y\n", "all 2 data rows are bad"),
        ("timestamp,kVA\n2024-01-01 00:00,4\n", "at least two"),
        ("timestamp,Amps_A\n2024-01-01 00:00,4\n", "need a voltage"),
        ("timestamp,kW_A,W_B\n2024-01-01 00:00,4,5\n", "mix units"),
    ],
)
def test_unusable_files_are_refused_with_the_reason(tmp_path: Path, content: str, fragment: str) -> None:
    path = tmp_path / "meter.csv"
    path.write_text(content)
    with pytest.raises(MeteredDataError) as exc:
        analyze_csv(path)
    assert str(path) in str(exc.value)
    assert fragment in str(exc.value)


def test_binary_missing_and_folder_are_refused(tmp_path: Path) -> None:
    binary = tmp_path / "meter.xlsx"
    binary.write_bytes(b"PK\x03\x04\x00\x00binary")
    with pytest.raises(MeteredDataError, match="binary"):
        analyze_csv(binary)
    with pytest.raises(MeteredDataError, match="file not found"):
        analyze_csv(tmp_path / "absent.csv")
    with pytest.raises(MeteredDataError, match="folder"):
        analyze_csv(tmp_path)


def test_bad_options_are_refused() -> None:
    text = _csv("timestamp,kW", ["2024-01-01 00:00,1", "2024-01-01 00:15,2"])
    with pytest.raises(MeteredDataError, match="power factor"):
        analyze_csv(text, pf=1.2)
    with pytest.raises(MeteredDataError, match="power factor"):
        analyze_csv(text, pf=0)
    with pytest.raises(MeteredDataError, match="unknown time zone 'Mars/Olympus'"):
        analyze_csv(text, tz="Mars/Olympus")


# --------------------------------------------------------------------------- units and conversion


def test_kw_converted_at_power_factor() -> None:
    rows = [f"{t:%Y-%m-%d %H:%M},{v}" for t, v in zip(_series(datetime(2024, 1, 1), 4), [40, 72, 50, 10], strict=True)]
    r = analyze_csv(_csv("timestamp,Demand (kW)", rows), pf=0.8)
    # kVA = kW / pf (definition of power factor; common practice)
    assert_close(r.peak_kva, 72 / 0.8, what="kVA from kW at pf 0.8")
    assert r.conversion == "kW converted to kVA at pf 0.80"
    assert r.unit == "kW" and r.pf == 0.8
    r9 = analyze_csv(_csv("timestamp,kW", rows))
    assert_close(r9.peak_kva, 80.0, what="default pf 0.9")
    assert r9.conversion == "kW converted to kVA at pf 0.90"


@pytest.mark.parametrize(
    ("header", "scale", "unit"),
    [("kW", 1.0, "kW"), ("W", 1000.0, "W"), ("Power [watts]", 1000.0, "W"), ("MW", 0.001, "MW")],
)
def test_units_watts(header: str, scale: float, unit: str) -> None:
    rows = [
        f"{t:%Y-%m-%d %H:%M},{v * scale:g}" for t, v in zip(_series(datetime(2024, 1, 1), 3), [9, 18, 4.5], strict=True)
    ]
    r = analyze_csv(_csv(f"timestamp,{header}", rows), pf=0.9)
    assert r.unit == unit
    assert f"{unit} detected from header" in r.units_note
    assert_close(r.peak_kva, 20.0, what=f"{header}: 18 kW / 0.9")


@pytest.mark.parametrize(
    ("header", "scale", "unit"), [("kVA", 1.0, "kVA"), ("VA", 1000.0, "VA"), ("MVA", 0.001, "MVA")]
)
def test_units_volt_amperes(header: str, scale: float, unit: str) -> None:
    rows = [
        f"{t:%Y-%m-%d %H:%M},{v * scale:g}" for t, v in zip(_series(datetime(2024, 1, 1), 3), [9, 18, 4.5], strict=True)
    ]
    r = analyze_csv(_csv(f"timestamp,{header}", rows), pf=0.5)
    assert r.unit == unit and r.conversion is None and r.pf is None
    assert_close(r.peak_kva, 18.0, what=f"{header}: pf does not apply")


def test_kva_preferred_over_kw_and_other_columns_reported() -> None:
    rows = ["2024-01-01 00:00,10,12,0.8,3", "2024-01-01 00:15,20,25,0.8,5"]
    r = analyze_csv(_csv("timestamp,kW,kVA,PF,kWh", rows))
    assert r.unit == "kVA" and r.peak_kva == 25
    assert any("columns not used" in n and "kW" in n and "kWh" in n for n in r.notes)


# --------------------------------------------------------------------------- basis


def test_thirty_day_alternative_uses_highest_phase_times_phases() -> None:
    stamps = _series(datetime(2024, 2, 1), 40 * 96)  # 40 days
    rows = []
    for i, t in enumerate(stamps):
        a, b, c = 20.0, 15.0, 10.0
        if i == 1000:
            a = 50.0  # phase A peak, alone
        if i == 2000:
            a, b, c = 30.0, 30.0, 30.0  # coincident total peak 90
        rows.append(f"{t:%Y-%m-%d %H:%M},{a},{b},{c}")
    r = analyze_csv(_csv("timestamp,kVA_A,kVA_B,kVA_C", rows))
    assert r.phases == ("A", "B", "C")
    assert r.basis == Basis.THIRTY_DAY
    assert_close(r.coverage_days, 40.0)
    assert r.peak_kva == 90.0 and r.peak_at == stamps[2000]
    peaks = {p.phase: p for p in r.phase_peaks}
    assert peaks["A"].peak_kva == 50.0 and peaks["A"].peak_at == stamps[1000]
    assert peaks["B"].peak_kva == 30.0 and peaks["C"].peak_kva == 30.0
    # NFPA 70-2023 220.87 Exception, from memory: the highest loaded phase is recorded;
    # here that phase's peak × 3 phases is the demand, then × 125 %.
    assert r.basis_kva == 150.0
    assert_close(r.existing_load_kva, 187.5, what="220.87 Exception 30-day basis")
    assert "30-day alternative" in r.message
    assert any("occupied" in n for n in r.notes)


def test_thirty_day_alternative_total_only() -> None:
    stamps = _series(datetime(2024, 2, 1), 30 * 96)  # exactly 30 days
    rows = [f"{t:%Y-%m-%d %H:%M},{80 if i == 7 else 40}" for i, t in enumerate(stamps)]
    r = analyze_csv(_csv("timestamp,kVA", rows))
    assert r.basis == Basis.THIRTY_DAY
    assert r.basis_kva == 80 and r.existing_load_kva == 100


def test_less_than_thirty_days_is_insufficient() -> None:
    stamps = _series(datetime(2024, 2, 1), 29 * 96)
    rows = [f"{t:%Y-%m-%d %H:%M},40" for t in stamps]
    r = analyze_csv(_csv("timestamp,kVA", rows))
    assert r.basis == Basis.INSUFFICIENT
    assert r.existing_load_kva is None and r.basis_kva is None
    assert "No existing load computed" in r.message and "29.0 days" in r.message
    assert r.to_json()["existing_load_kva"] is None
    assert r.peak_kva == 40  # the peak is still reported


def test_per_phase_total_column_sets_the_peak() -> None:
    rows = ["2024-01-01 00:00,30,10,10,10", "2024-01-01 00:15,33,12,11,10", "2024-01-01 00:30,31,9,9,13"]
    r = analyze_csv(_csv("timestamp,kW total,kW L1,kW L2,kW L3", rows), pf=1.0)
    assert r.peak_kva == 33 and r.phases == ("A", "B", "C")
    assert [p.peak_kva for p in r.phase_peaks] == [12, 11, 13]


def test_amps_with_voltage_columns() -> None:
    rows = ["2024-01-01 00:00,100,90,80,120", "2024-01-01 00:15,110,95,85,120"]
    r = analyze_csv(_csv("timestamp,Amps_A,Amps_B,Amps_C,V_LN", rows))
    # S = Σ V_LN × I per phase (definition of apparent power; common practice)
    assert_close(r.peak_kva, 120 * (110 + 95 + 85) / 1000)
    rows_ll = ["2024-01-01 00:00,100,90,80,208", "2024-01-01 00:15,110,95,85,208"]
    r = analyze_csv(_csv("timestamp,I_A,I_B,I_C,V_LL", rows_ll))
    assert_close(r.peak_kva, 208 / 3**0.5 * (110 + 95 + 85) / 1000)
    r = analyze_csv(_csv("timestamp,Amps_A,Amps_B", ["2024-01-01 00:00,10,20", "2024-01-01 00:15,30,20"]), volts=120)
    assert_close(r.peak_kva, 120 * 50 / 1000)


# --------------------------------------------------------------------------- demand window


def test_five_minute_readings_use_a_15_minute_rolling_average() -> None:
    """220.87 (NFPA 70-2023, from memory) uses the highest 15-minute average demand."""
    stamps = _series(datetime(2024, 3, 1), 24, step_min=5)
    values = [10.0] * 24
    values[10] = 40.0  # one 5-minute burst
    values[15], values[16], values[17] = 25.0, 25.0, 25.0  # 15 minutes at 25
    rows = [f"{t:%Y-%m-%d %H:%M},{v}" for t, v in zip(stamps, values, strict=True)]
    r = analyze_csv(_csv("timestamp,kVA", rows))
    assert r.interval_minutes == 5
    assert "rolling" in r.demand_window
    assert_close(r.peak_kva, 25.0)  # the burst averages to (40 + 10 + 10) / 3 = 20 only
    assert r.peak_at == stamps[17]  # the last reading of the window
    # A gap inside the window leaves it incomplete: not counted.
    del rows[16]
    r = analyze_csv(_csv("timestamp,kVA", rows))
    assert_close(r.peak_kva, 20.0)
    assert r.gaps == 1


def test_hourly_readings_are_flagged_as_possibly_understated() -> None:
    rows = [f"{t:%Y-%m-%d %H:%M},5" for t in _series(datetime(2024, 3, 1), 5, step_min=60)]
    r = analyze_csv(_csv("timestamp,kVA", rows))
    assert r.interval_minutes == 60
    assert any("understated" in n for n in r.notes)


# --------------------------------------------------------------------------- formats


def test_timestamp_forms() -> None:
    assert parse_timestamp("2024-07-04T13:45:00-05:00") == datetime(2024, 7, 4, 18, 45, tzinfo=UTC)
    assert parse_timestamp("2024-07-04T18:45Z") == datetime(2024, 7, 4, 18, 45, tzinfo=UTC)
    assert parse_timestamp("2024-07-04 13:45") == datetime(2024, 7, 4, 13, 45)
    assert parse_timestamp("2024-07-04 13:45:30") == datetime(2024, 7, 4, 13, 45, 30)
    assert parse_timestamp("07/04/2024 13:45") == datetime(2024, 7, 4, 13, 45)
    assert parse_timestamp("7/4/2024 1:45 PM") == datetime(2024, 7, 4, 13, 45)
    assert parse_timestamp("7/4/2024 12:15 AM") == datetime(2024, 7, 4, 0, 15)
    for bad in ("2024-13-01 00:00", "07/04/24 13:45", "noon", "13/45/2024 10:00"):
        with pytest.raises(ValueError):
            parse_timestamp(bad)


def test_us_dates_semicolons_preamble_and_date_time_columns() -> None:
    text = (
        "Meter export for an invented service\n"
        "Serial;0000\n"
        "\n"
        "Date;Time;kW_A;kW_B;kW_C\n"
        "01/02/2024;00:00;1;2;3\n"
        "01/02/2024;00:15;2;2;3\n"
        "01/02/2024;00:30;1;1;1\n"
    )
    r = analyze_csv(text, pf=1.0)
    assert r.rows == 3 and r.peak_kva == 7 and r.peak_at == datetime(2024, 1, 2, 0, 15)
    assert r.phases == ("A", "B", "C")


def test_readings_api_and_daily_peaks() -> None:
    start = datetime(2024, 1, 1)
    readings = [(start + timedelta(minutes=15 * i), (1.0 + i % 96, 2.0, 3.0)) for i in range(96 * 3)]
    readings.append(("garbage", (1, 2, 3)))
    r = analyze_readings(readings, unit="kW", phases=("A", "B", "C"), pf=1.0)
    assert r.rows == 288 and r.peak_kva == 96 + 5
    assert [b.line for b in r.bad_rows] == [289]
    assert daily_peaks(r) == [("2024-01-01", 101.0), ("2024-01-02", 101.0), ("2024-01-03", 101.0)]
    single = analyze_readings([("2024-01-01 00:00", 5000), ("2024-01-01 00:15", 7000)], unit="VA")
    assert single.peak_kva == 7.0
    with pytest.raises(MeteredDataError, match="unit must be"):
        analyze_readings([], unit="hp")


# --------------------------------------------------------------------------- properties


_values = st.lists(
    st.floats(min_value=0, max_value=5000, allow_nan=False).map(lambda x: round(x, 2)), min_size=3, max_size=120
)


@settings(max_examples=60, deadline=None)
@given(values=_values, seed=st.integers(0, 10_000))
def test_peak_invariant_to_row_order(values: list[float], seed: int) -> None:
    stamps = _series(datetime(2024, 6, 1), len(values))
    rows = [f"{t:%Y-%m-%d %H:%M},{v}" for t, v in zip(stamps, values, strict=True)]
    shuffled = rows[:]
    random.Random(seed).shuffle(shuffled)
    a = analyze_csv(_csv("timestamp,kVA", rows))
    b = analyze_csv(_csv("timestamp,kVA", shuffled))
    assert a.peak_kva == b.peak_kva == max(values)
    assert a.peak_at == b.peak_at == stamps[values.index(max(values))]
    assert b.gaps == 0 and b.duplicates == 0 and b.interval_minutes == 15


@settings(max_examples=60, deadline=None)
@given(values=_values, factor=st.sampled_from([0.5, 2.0, 3.0, 10.0, 1000.0]))
def test_scaling_readings_scales_the_peak(values: list[float], factor: float) -> None:
    stamps = _series(datetime(2024, 6, 1), len(values))
    a = analyze_readings(list(zip(stamps, values, strict=True)), unit="kW", pf=0.9)
    b = analyze_readings([(t, v * factor) for t, v in zip(stamps, values, strict=True)], unit="kW", pf=0.9)
    assert_close(b.peak_kva, a.peak_kva * factor, rel=1e-9, abs_=1e-9)
    if a.peak_kva > 0:
        assert b.peak_at == a.peak_at


def test_offset_timestamps_shown_in_a_given_zone() -> None:
    """Timestamps with UTC offsets and --tz: instants kept, days and peak_at in the zone."""
    utc0 = datetime(2023, 11, 4, 12, 0, tzinfo=UTC)
    stamps = [utc0 + timedelta(minutes=15 * i) for i in range(4 * 48)]
    rows = [f"{t.isoformat()},{(i * 7) % 50}" for i, t in enumerate(stamps)]
    r = analyze_csv(_csv("timestamp,kVA", rows), tz="America/Chicago")
    assert r.gaps == 0 and r.duplicates == 0 and r.readings == len(stamps)
    k = [(i * 7) % 50 for i in range(len(stamps))].index(49)
    assert r.peak_at == stamps[k] and r.peak_at.utcoffset() == timedelta(hours=-5)
    # Local days: 2023-11-04 07:00 CDT (12:00 UTC) to 2023-11-06 05:45 CST.
    assert [d.day.isoformat() for d in r.daily_peaks] == ["2023-11-04", "2023-11-05", "2023-11-06"]


def test_fast_and_row_by_row_readers_agree_on_high_resolution_watts() -> None:
    """35,040 distinct W readings (no repeats) through both readers: the same result."""
    rnd = random.Random(11)
    stamps = _series(datetime(2023, 1, 1), 35_040)
    rows = [f"{t:%Y-%m-%d %H:%M},{rnd.uniform(1e4, 9e4):.4f}" for t in stamps]
    text = _csv("timestamp,W", rows)
    fast = analyze_csv(text, pf=0.95)
    slow = analyze_csv(text.replace("timestamp,W", '"timestamp",W', 1), pf=0.95)
    assert fast.rows == slow.rows == 35_040
    assert_close(fast.peak_kva, slow.peak_kva, rel=1e-12)
    assert fast.peak_at == slow.peak_at
    assert_close(fast.existing_load_kva or 0, slow.existing_load_kva or 0, rel=1e-12)
    assert fast.daily_peaks[100].day == slow.daily_peaks[100].day
    assert_close(fast.daily_peaks[100].peak_kva, slow.daily_peaks[100].peak_kva, rel=1e-12)


def test_one_bad_row_deep_in_a_year_is_found_by_line() -> None:
    text, _ = _year_kva(peak_index=100, peak_kva=250.0)
    lines = text.split("\n")
    lines[30_001] = lines[30_001].split(",")[0] + ",nan"  # a not-finite reading on line 30,002
    r = analyze_csv("\n".join(lines))
    assert [(b.line, "not a finite number" in b.reason) for b in r.bad_rows] == [(30_002, True)]
    assert r.rows == 35_039 and r.gaps == 1 and r.peak_kva == 250.0


@pytest.mark.parametrize(
    ("zone_name", "year"),
    # Clock changes at 02:00 local, at 01:00 UTC, by 30 minutes, at midnight, at 00:00 and 01:00, on a
    # half-hour standard offset, and at 00:01 so the repeated hour spans midnight (IANA tz database
    # shipped with Python).
    [
        ("America/Chicago", 2023),
        ("Europe/London", 2023),
        ("Australia/Lord_Howe", 2023),
        ("America/Santiago", 2023),
        ("America/Havana", 2023),
        ("America/St_Johns", 2023),
        ("America/Goose_Bay", 2010),
    ],
)
def test_a_year_of_local_wall_clock_times_in_zones_with_clock_changes(zone_name: str, year: int) -> None:
    """A meter logging local time for a year: no gaps, no duplicates, every repeat found."""
    zone = ZoneInfo(zone_name)
    start = datetime(year, 1, 1, tzinfo=UTC)
    aware = [(start + timedelta(minutes=15 * i)).astimezone(zone) for i in range(35_040)]
    wall = [t.replace(tzinfo=None) for t in aware]
    repeats = len(wall) - len(set(wall))
    assert repeats > 0  # each of these zones turned its clocks back that year
    peak_i = next(i for i, t in enumerate(aware) if t.fold == 1)  # inside the repeated window
    rows = [f"{t:%Y-%m-%d %H:%M},{9999 if i == peak_i else i % 5000}" for i, t in enumerate(wall)]
    r = analyze_csv(_csv("timestamp,kVA", rows), tz=zone_name)
    assert (r.gaps, r.duplicates, r.dst_repeats, r.readings, len(r.bad_rows)) == (0, 0, repeats, 35_040, 0)
    assert r.peak_kva == 9999 and r.peak_at == aware[peak_i]
    assert r.peak_at.utcoffset() == aware[peak_i].utcoffset()
    assert r.basis == Basis.ONE_YEAR
    daily: dict[str, float] = {}
    for i, t in enumerate(wall):  # local calendar days, by brute force
        v = 9999 if i == peak_i else i % 5000
        daily[t.date().isoformat()] = max(daily.get(t.date().isoformat(), -1), v)
    assert daily_peaks(r) == sorted(daily.items())


@pytest.mark.parametrize("zone", [None, "America/Chicago"])
def test_timestamps_mixing_offsets_and_none_are_bad_rows(zone: str | None) -> None:
    rows = [f"2024-05-01 0{h}:00,{10 + h}" for h in range(6)]
    rows[2] = "2024-05-01T02:00:00-05:00,50"  # line 4: has an offset while the first row has none
    r = analyze_csv(_csv("timestamp,kVA", rows), tz=zone)
    assert [b.line for b in r.bad_rows] == [4]
    assert "differs in form from the first (no UTC offset)" in r.bad_rows[0].reason
    assert r.rows == 5 and r.peak_kva == 15 and r.gaps == 1
    flipped = [f"2024-05-01T0{h}:00:00+00:00,{10 + h}" for h in range(6)]
    flipped[4] = "2024-05-01 04:00,50"  # line 6
    r = analyze_csv(_csv("timestamp,kVA", flipped), tz=zone)
    assert [b.line for b in r.bad_rows] == [6]
    assert "(a UTC offset)" in r.bad_rows[0].reason


def test_amps_with_per_phase_line_to_neutral_voltages() -> None:
    rows = ["2024-01-01 00:00,100,90,80,118,120,122", "2024-01-01 00:15,110,95,85,119,121,123"]
    r = analyze_csv(
        _csv("timestamp,Phase A Current,Phase B Current,Phase C Current,Voltage A-N,Voltage B-N,V_CN", rows)
    )
    # S = Σ V_LN × I per phase (definition of apparent power; common practice)
    assert_close(r.peak_kva, (119 * 110 + 121 * 95 + 123 * 85) / 1000)
    assert r.phases == ("A", "B", "C")
    assert not any("taken as line-to-neutral" in n for n in r.notes)  # every voltage named its kind
    r = analyze_csv(
        _csv("timestamp,I_A,I_B,I_C,Volts A-B", ["2024-01-01 00:00,10,10,10,480", "2024-01-01 00:15,20,20,20,480"])
    )
    assert_close(r.peak_kva, 480 / 3**0.5 * 60 / 1000)  # line-to-line voltage ÷ √3 per phase


def test_uploaded_bytes_with_bom_and_latin1() -> None:
    text = _csv("timestamp,kVA", ["2024-01-01 00:00,5", "2024-01-01 00:15,7"])
    r = analyze_csv(("\ufeff" + text).encode("utf-8"), name="upload.csv")
    assert r.source == "upload.csv" and r.peak_kva == 7
    r = analyze_csv(("Compteur é\n" + text).encode("latin-1"), name="upload.csv")
    assert r.peak_kva == 7 and "read as Latin-1" in r.notes[0]
    with pytest.raises(MeteredDataError, match="upload.csv: the file is empty"):
        analyze_csv(b"", name="upload.csv")


def test_offset_timestamp_on_a_clock_change_day_among_naive_ones() -> None:
    rows = [f"2023-11-05 0{h}:00,{10 + h}" for h in range(6)]
    rows[1] = "2023-11-05T01:00:00-05:00,50"  # line 3, inside the repeated hour
    r = analyze_csv(_csv("timestamp,kVA", rows), tz="America/Chicago")
    assert [b.line for b in r.bad_rows] == [3]
    assert r.rows == 5 and r.peak_kva == 15


_cell = st.one_of(
    st.sampled_from(["", " ", "x", "nan", "-1", "1e400", "12.5", "0", "7", '"3"', "2024-01-01 00:15", "24:00"]),
    st.text(alphabet='0123456789.-:/ TZ+,"\r\nAPM', max_size=20),
    st.datetimes(min_value=datetime(2023, 3, 11), max_value=datetime(2023, 11, 6)).map(lambda t: f"{t:%Y-%m-%d %H:%M}"),
    st.datetimes(min_value=datetime(2023, 3, 11), max_value=datetime(2023, 11, 6)).map(lambda t: f"{t:%m/%d/%Y %H:%M}"),
    st.floats(allow_nan=True, allow_infinity=True).map(repr),
    st.datetimes().map(lambda t: t.isoformat(sep=" ")),
    st.datetimes(timezones=st.sampled_from([UTC, CHICAGO, ZoneInfo("Asia/Tokyo")])).map(lambda t: t.isoformat()),
    st.datetimes(min_value=datetime(2023, 11, 5), max_value=datetime(2023, 11, 5, 3)).map(
        lambda t: f"{t:%Y-%m-%d %H:%M}"
    ),
)


@settings(max_examples=200, deadline=None)
@given(
    header=st.sampled_from(
        ["timestamp,kW", "timestamp,kVA_A,kVA_B", "Date,Time,W", "time;kW", "timestamp,Amps,V", "t,Amps_A,Amps_B,V_LL"]
    ),
    rows=st.lists(st.lists(_cell, min_size=1, max_size=4), max_size=30),
    zone=st.sampled_from([None, "America/Chicago", "Europe/London"]),
    strict=st.booleans(),
)
def test_any_text_gives_a_result_or_a_named_refusal(
    header: str, rows: list[list[str]], zone: str | None, strict: bool
) -> None:
    """Whatever the bytes, the answer is a result or MeteredDataError, never another exception."""
    delim = ";" if ";" in header else ","
    text = header + "\n" + "\n".join(delim.join(r) for r in rows) + "\n"
    try:
        r = analyze_csv(text, tz=zone, strict=strict, name="fuzz.csv")
    except MeteredDataError as exc:
        assert str(exc).startswith("fuzz.csv: ")
        return
    assert r.readings >= 2 and r.peak_kva >= 0
    assert all(b.line >= 2 for b in r.bad_rows)
    r.to_json()


def test_daily_readings_two_days_apart_skip_the_empty_days() -> None:
    rows = ["2024-01-01 12:00,5", "2024-01-03 12:00,6", "2024-01-05 12:00,7"]
    r = analyze_csv(_csv("timestamp,kVA", rows))
    assert daily_peaks(r) == [("2024-01-01", 5.0), ("2024-01-03", 6.0), ("2024-01-05", 7.0)]
    assert r.interval_minutes == 2 * 24 * 60


@pytest.mark.parametrize("zone", [None, "America/Chicago", "Asia/Tokyo"])
@pytest.mark.parametrize(
    "stamps",
    [
        ("9999-12-31 23:00", "9999-12-31 23:15"),
        ("0001-01-01 00:00", "0001-01-01 00:15"),
        ("0001-01-01T00:00+00:00", "0001-01-01T00:15+00:00"),
    ],
)
def test_timestamps_at_the_ends_of_the_calendar_are_refused_by_name_or_read(
    zone: str | None, stamps: tuple[str, str]
) -> None:
    try:
        r = analyze_csv(_csv("timestamp,kVA", [f"{stamps[0]},1", f"{stamps[1]},2"]), tz=zone)
    except MeteredDataError as exc:
        assert "too near year 1 or 9999" in str(exc)
    else:
        assert r.peak_kva == 2 and r.interval_minutes == 15
