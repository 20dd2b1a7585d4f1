"""How numbers, durations, times, frequencies and wavelengths are written (advisor.fmt).

The speed of light is exact by the SI definition (BIPM, The International System of Units, 9th
edition, 2019, p. 127): 3.5 mm ↔ 85.65 GHz, 7 mm ↔ 42.83 GHz.
"""

from __future__ import annotations

import pandas as pd
import pytest

from advisor import fmt


@pytest.mark.parametrize(
    "ghz, text",
    [
        (299_792_458.0 / 3.5e-3 / 1e9, "85.7 GHz (3.50 mm)"),  # --freq 3.5mm
        (299_792_458.0 / 7e-3 / 1e9, "42.8 GHz (7.00 mm)"),  # --freq 7mm
        (86.0, "86 GHz (3.49 mm)"),
        (230.538, "230.538 GHz (1.30 mm)"),  # a typed frequency reads back as typed
    ],
)
def test_frequency_with_its_wavelength(ghz, text):
    assert fmt.freq_wave_text(ghz) == text


@pytest.mark.parametrize(
    "minutes, text",
    [
        (1022, "17 h 2 min"),
        (1611.5, "26 h 52 min"),
        (45, "45 min"),
        (60, "1 h"),
        (59.6, "1 h"),
        (0, "0 min"),
        (0.2, "<1 min"),
        (3000, "2 d 2 h"),
        (float("nan"), "n/a"),
        (None, "n/a"),
    ],
)
def test_durations_read_as_hours_and_minutes(minutes, text):
    assert fmt.duration_text(minutes) == text


def test_hours_become_hours_and_minutes():
    assert fmt.hours_text(1.5) == "1 h 30 min" and fmt.hours_text(3.2) == "3 h 12 min"


@pytest.mark.parametrize(
    "value, decimals, text",
    [(-0.04, 1, "0.0"), (-0.4, 0, "0"), (-0.06, 1, "-0.1"), (3.14159, 2, "3.14"), (float("inf"), 1, "n/a")],
)
def test_fixed_decimals_never_write_minus_zero(value, decimals, text):
    assert fmt.fixed(value, decimals) == text


@pytest.mark.parametrize(
    "value, text",
    [
        (85.65499, "85.7"),
        (3.4969, "3.50"),
        (12345, "12300"),
        (0.000123456, "0.000123"),
        (-0.0001, "-0.000100"),
        (0, "0"),
    ],
)
def test_three_significant_figures(value, text):
    assert fmt.sig(value) == text


def test_plurals():
    assert [fmt.plural(n, "attempt") for n in (0, 1, 2)] == ["0 attempts", "1 attempt", "2 attempts"]
    assert fmt.plural(1, "entry", "entries") == "1 entry" and fmt.plural(3, "entry", "entries") == "3 entries"


def test_odds_never_round_to_certainty():
    assert (fmt.odds_text(0.004), fmt.odds_text(0.996), fmt.odds_text(0.5)) == ("<1%", ">99%", "50%")


def test_local_time_with_utc_beside_it_and_dates_only_where_they_differ():
    t = pd.Timestamp("2026-12-01T03:00:00Z")
    assert fmt.local_utc(t, "America/Denver") == "30 Nov 20:00 MST (1 Dec 03:00 UTC)"
    assert fmt.local_utc(t, "UTC") == "1 Dec 03:00 UTC (03:00 UTC)"
    assert fmt.local_utc(pd.Timestamp("2026-12-01T17:00Z"), "America/Denver") == "1 Dec 10:00 MST (17:00 UTC)"


def test_periods_show_each_date_once():
    tz = "America/Denver"
    assert (
        fmt.span_text(pd.Timestamp("2026-12-01T17:00Z"), pd.Timestamp("2026-12-01T18:50Z"), tz)
        == "1 Dec 10:00 → 11:50 MST (17:00 → 18:50 UTC)"
    )
    assert (
        fmt.span_text(pd.Timestamp("2026-12-01T03:00Z"), pd.Timestamp("2026-12-01T07:20Z"), tz)
        == "30 Nov 20:00 → 1 Dec 00:20 MST (1 Dec 03:00 → 07:20 UTC)"
    )


def test_wrapping_never_parts_a_number_from_its_unit():
    text = "laser scan: expected 199 µm rms → Ruze efficiency 0.60 at 86 GHz (λ/16 = 218 µm)"
    for width in range(20, 60):
        lines = fmt.wrap(text, width)
        assert all(not line.rstrip().endswith(("199", "86", "218")) for line in lines), (width, lines)
        assert " ".join(lines).split() == text.split()
        assert all("\u00a0" not in line for line in lines)


def test_hours_total_keeps_small_totals_readable():
    from advisor.fmt import hours_total

    assert [hours_total(h) for h in (4211.4, 10.0, 7.46, 0.17, 0.01, 0.0, float("nan"))] == [
        "4211 h",
        "10 h",
        "7.5 h",
        "0.2 h",
        "<0.1 h",
        "0.0 h",
        "n/a",
    ]
