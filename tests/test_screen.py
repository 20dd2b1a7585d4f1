"""The operator's screen: verdict, cause and numbers first, the verdict again last, 80×24.

The weather here is synthetic (tests/conftest.py) and only puts the decision in a known state;
these tests check what the screen shows, not physics.
"""

from __future__ import annotations

import io
import re

import pandas as pd
import pytest

from advisor.commands.main import main
from advisor.views.callparts import blocked_ids, blocked_names, cause_line, sections
from advisor.views.context import Context
from advisor.views.jsondoc import to_json_dict
from advisor.views.panel import render_panel, short_path
from advisor.views.plain import render_plain
from advisor.vocabulary import METHODS, VERDICT

from .conftest import NIGHT_UTC, weather_table

CTX = Context(
    site_name="Test Site (invented)",
    time_zone="America/Denver",
    feed_source="/very/long/folder/name/that/goes/on/and/on/for/ever/and/ever/weather/mast_feed.csv",
    is_demo=False,
    data_quality={},
)
WINDY = dict(wind_mean_ms=6.0, wind_gust_ms=11.0)
RAINY = dict(precip_mm_h=2.5, rel_humidity_pct=95.0)


@pytest.fixture()
def calls(call_for):
    """One call of each kind: scan on a calm night, postpone in wind, in rain, undetermined when stale."""
    return {
        "scan": call_for(weather_table()),
        "windy": call_for(weather_table(**WINDY)),
        "rainy": call_for(weather_table(**RAINY)),
        "stale": call_for(weather_table(), at=NIGHT_UTC + pd.Timedelta(hours=26, minutes=51)),
    }


def panel_lines(call, ctx=CTX, width=80, height=24, details=False) -> list[str]:
    from rich.console import Console

    console = Console(file=io.StringIO(), width=width, height=height, color_system=None)
    console.print(render_panel(call, ctx, width, height, details))
    return console.file.getvalue().rstrip("\n").split("\n")


def test_the_synthetic_weather_gives_the_calls_these_tests_need(calls):
    assert [calls[k].verdict for k in ("scan", "windy", "rainy", "stale")] == [
        "scan",
        "postpone",
        "postpone",
        "undetermined",
    ]


@pytest.mark.parametrize("kind", ["scan", "windy", "rainy", "stale"])
def test_compact_panel_fits_80_by_24_with_the_verdict_first_and_last(calls, kind):
    call = calls[kind]
    lines = panel_lines(call)
    label = VERDICT[call.verdict].label
    assert len(lines) <= 22, "\n".join(lines)  # 24 rows less the command line and the next prompt
    assert all(len(line) <= 80 for line in lines)
    assert label in lines[1] and label in lines[-2]  # first line inside the border, and the last
    assert "Mean wind" in lines[1] or "Precipitation" in lines[1] or "old" in lines[1] or "µm" in lines[1]


@pytest.mark.parametrize("kind", ["scan", "windy", "rainy", "stale"])
def test_compact_plain_text_fits_80_by_24(calls, kind):
    text = render_plain(calls[kind], CTX)
    lines = text.rstrip("\n").split("\n")
    assert len(lines) <= 22 and all(len(line) <= 80 for line in lines), text
    assert lines[1].startswith(f"VERDICT: {VERDICT[calls[kind].verdict].label}")
    assert lines[-1].startswith(f"VERDICT: {VERDICT[calls[kind].verdict].label}")


def test_postpone_names_its_cause_with_the_numbers(calls):
    assert cause_line(calls["windy"]).startswith("Mean wind 6.0 m/s is above the high-frequency limit of 4.0 m/s")
    assert cause_line(calls["rainy"]).startswith("Precipitation 2.5 mm/h")
    head = " ".join(panel_lines(calls["rainy"])[1:3])
    assert "POSTPONE" in head and "Precipitation 2.5 mm/h" in head


def test_undetermined_names_the_stale_feed_with_its_age_in_hours_and_minutes(calls):
    text = " ".join(render_plain(calls["stale"], CTX).split())
    assert "26 h 51 min old" in text and "Do not scan on this advice" in text
    assert "data age 26 h 51 min" in text


def test_cause_line_shows_whatever_blocking_reasons_the_call_carries(calls):
    from dataclasses import replace

    from advisor.decision import Reason

    invented = Reason(
        "unreachable_target",
        "both",
        "block",
        "Target 3 mm needs 150 µm; the dish holds 180 µm: no correction reaches it.",
    )
    call = replace(calls["scan"], verdict="postpone", reasons=[invented, *calls["scan"].reasons])
    assert cause_line(call).startswith("Target 3 mm needs 150 µm")
    assert blocked_ids(call, "scan")[0] == "unreachable_target" and "unreachable target" in blocked_names(call, "scan")


@pytest.mark.parametrize("kind", ["windy", "rainy", "stale"])
def test_every_infeasible_method_says_what_blocks_it_in_every_view(calls, kind):
    call = calls[kind]
    doc = to_json_dict(call, CTX, VERDICT[call.verdict].exit_status)
    plain = render_plain(call, CTX)
    details = render_plain(call, CTX, details=True)
    panel = "\n".join(panel_lines(call))
    for method in METHODS:
        assert not call.candidates[method]["feasible"]
        names, ids = blocked_names(call, method), blocked_ids(call, method)
        assert names and ids and doc["candidates"][method]["blocked_by"] == ids
        assert names[0] in plain and names[0] in panel and ids[0] in details


def test_reasons_are_grouped_in_plain_words(calls):
    titles = [s.title for s in sections(calls["scan"])]
    assert titles[:2] == ["Why scan now", "Why not the astronomical method"]
    assert [s.title for s in sections(calls["windy"])][0] == "Why postpone"
    compact = render_plain(calls["scan"], CTX)
    assert "log-odds" not in compact and "[" not in compact.split("\n", 2)[2]  # no rule ids either


def test_details_keep_rule_ids_and_every_key_condition(calls):
    text = render_plain(calls["windy"], CTX, details=True)
    assert "[high_frequency_wind_limit]" in text and "Key conditions" in text and "Stow the antenna" in text
    assert "reference age" in text and "2 h" in text  # durations as hours and minutes


def test_no_line_ends_with_a_number_whose_unit_starts_the_next(calls):
    unit_first = re.compile(r"^\s*(µm|m/s|°C|GHz|mm|min|h|km|%)\b")
    for call in calls.values():
        for width in (60, 72, 80, 100):
            for text in (render_plain(call, CTX, width=width), render_plain(call, CTX, width=width, details=True)):
                lines = text.split("\n")
                for a, b in zip(lines, lines[1:]):
                    assert not (re.search(r"\d$", a.rstrip()) and unit_first.match(b)), (a, b)


def test_no_minus_zero_anywhere(call_for):
    call = call_for(weather_table(air_temp_c=-0.01, temp_rate_c_per_h=0.0))
    for text in (render_plain(call, CTX), render_plain(call, CTX, details=True)):
        assert not re.search(r"(?<![\d.])-0(\.0+)?(?![\d.])", text), text


def test_feed_path_in_the_border_is_shortened_not_cut():
    path = CTX.feed_source
    short = short_path(path, 40)
    assert short.startswith("…/") and short.endswith("weather/mast_feed.csv") and len(short) <= 40
    assert short_path("feed.csv", 40) == "feed.csv"


def test_a_taller_terminal_shows_more_reasons(calls):
    short, tall = panel_lines(calls["windy"], height=24), panel_lines(calls["windy"], height=50)
    assert len(tall) > len(short) and "more with --details" in "\n".join(short)


def test_check_prints_wavelength_frequencies_with_sensible_figures(capsys):
    assert main(["check", "--freq", "3.5mm"]) in (0, 10, 11, 12)
    out = capsys.readouterr().out
    assert "85.7 GHz (3.50 mm)" in out and "85.65" not in out


def test_demo_banner_and_flag_however_the_demo_site_is_named(capsys, tmp_path):
    from advisor.io.bundled import demo_dir

    copy = tmp_path / "my_site.yaml"
    copy.write_bytes((demo_dir() / "larch_basin.yaml").read_bytes())
    for f in ("larch_basin_mast.csv", "references.csv", "larch_basin_forecast.csv", "larch_basin_model.json"):
        (tmp_path / f).write_bytes((demo_dir() / f).read_bytes())
    for site in (str(demo_dir() / "larch_basin.yaml"), str(copy)):
        assert main(["check", "--site", site, "--json"]) in (0, 10, 11, 12)
        out = capsys.readouterr().out
        assert '"demo_data": true' in out
        main(["check", "--site", site])
        assert "DEMO DATA" in capsys.readouterr().out


def test_tick_says_demo_data_for_the_demo_site_named_explicitly(capsys, tmp_path):
    import json

    from advisor.io.bundled import demo_dir

    status = main(
        [
            "tick",
            "--site",
            str(demo_dir() / "larch_basin.yaml"),
            "--state-dir",
            str(tmp_path / "state"),
            "--at",
            "2026-12-01T03:00:00Z",
        ]
    )
    assert status == 0
    doc = json.loads((tmp_path / "state" / "advisory.json").read_text())
    assert doc["demo_data"] is True and "DEMO DATA" in capsys.readouterr().out
    assert "DEMO DATA" in (tmp_path / "state" / "advisory.html").read_text()


def test_plain_text_fits_80_columns_with_a_feed_and_a_forecast(calls):
    """Two sources share the feed line: each is shortened to its share, the demo's own files too."""
    from dataclasses import replace

    from advisor.io.bundled import demo_dir

    demo = str(demo_dir() / "larch_basin_mast.csv") + " + " + str(demo_dir() / "larch_basin_forecast.csv")
    long = CTX.feed_source + " + " + CTX.feed_source.replace("mast_feed", "forecast_feed")
    for source in (demo, long):
        text = render_plain(calls["scan"], replace(CTX, feed_source=source))
        feed_line = next(line for line in text.splitlines() if line.startswith("feed: "))
        assert all(len(line) <= 80 for line in text.splitlines()), text
        assert feed_line.count(" + ") == 1 and "forecast" in feed_line.split(" + ")[1]
