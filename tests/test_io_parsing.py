"""What the readers make of hostile content: times, numbers, keys, half-written lines, escapes.

Times are read strictly (ISO 8601 with the offsets RFC 3339 allows: Z or z, ±HH:MM, and the
ISO 8601 forms ±HHMM and ±HH) and range-checked before pandas sees them; numbers never
overflow; duplicate keys are errors; a feed's last line without its newline is ignored;
control characters never reach an error line.
"""

from __future__ import annotations

import json
import re

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from advisor.commands.main import main
from advisor.errors import FeedError, ModelError, RulesError, SiteError, UsageError
from advisor.io import feedfile
from advisor.io.feed import read_feed
from advisor.io.site import FeedLayout, load_site
from advisor.io.times import (
    describe_bad_time,
    epoch_times,
    iso_shape,
    parse_time_arg,
    parse_time_column,
    parse_time_text,
)
from advisor.io.yamlio import parse_yaml_text
from advisor.model.inference import parse_model
from advisor.text import clean_text, shorten
from tests.test_io_files import CORPUS

HEADER = "time,wind_mean_ms,wind_gust_ms,air_temp_c,rel_humidity_pct\n"


# --- times -------------------------------------------------------------------------------


@pytest.mark.parametrize(
    "text, utc",
    [
        ("2026-01-16T03:31:00Z", "2026-01-16T03:31:00"),
        ("2026-01-16t03:31:00z", "2026-01-16T03:31:00"),  # RFC 3339 allows lower case
        ("2026-01-16T03:31:00+00", "2026-01-16T03:31:00"),  # ISO 8601 ±HH
        ("2026-01-16T03:31:00+00:00", "2026-01-16T03:31:00"),
        ("2026-01-16T03:31:00-0330", "2026-01-16T07:01:00"),  # ISO 8601 ±HHMM
        ("2026-01-16 03:31+01:00", "2026-01-16T02:31:00"),
        ("2026-01-16T03:31:00.250Z", "2026-01-16T03:31:00.250"),
        ("  2026-01-16T03:31:00Z ", "2026-01-16T03:31:00"),
    ],
)
def test_valid_times_are_read_exactly(text, utc):
    assert parse_time_text(text) == pd.Timestamp(utc, tz="UTC")


@pytest.mark.parametrize(
    "text, words",
    [
        ("2026-01-16T03:3", "is incomplete"),  # a logger's line cut short: never 03:03
        ("2026-01-16T03:31:0", "is incomplete"),
        ("2026-01-16T03:31:00.", "is incomplete"),
        ("2026-01-16T03:31:00+0", "UTC offset '+0' of timestamp '2026-01-16T03:31:00+0' is incomplete"),
        ("2026-01-16T03:31:00+5:30", "UTC offset '+5:30' of timestamp '2026-01-16T03:31:00+5:30' is malformed"),
        ("2026-01-16T03:31:00 UTC", "names its zone as 'UTC'"),
        ("2026-01-16", "has a date but no time of day"),
        ("2026-01-16T03:31:00", "has no UTC offset"),
        ("2026-13-16T03:31:00Z", "is not a valid date and time"),
        ("2300-01-01T00:00:00Z", "is outside the years 1900..2199"),
        ("9999-12-31T23:59:59Z", "is outside the years 1900..2199"),
        ("1768534260000", "cannot read timestamp '1768534260000'"),
        ("x" * 5000, "is 5000 characters long"),
    ],
)
def test_bad_times_get_an_accurate_message(text, words):
    with pytest.raises(UsageError) as info:
        parse_time_arg(text, "--at")
    line = info.value.one_line()
    assert line.startswith("--at: ") and words in line, line
    assert len(line) < 400


def test_a_bad_time_in_a_column_names_its_line():
    texts = pd.Series(["2026-01-16T03:31:00Z", "2026-01-16T03:32:00Z", "2026-01-16T03:3"])
    with pytest.raises(FeedError) as info:
        parse_time_column(texts, source="f.csv", field="time", line_offset=2, error_type=FeedError)
    assert info.value.line == 4 and "'2026-01-16T03:3' is incomplete" in info.value.message
    lines = np.array([2, 5, 9])
    with pytest.raises(FeedError) as info:
        parse_time_column(texts, source="f.csv", field="time", line_offset=lines, error_type=FeedError)
    assert info.value.line == 9


def test_naive_times_need_a_zone_and_must_exist_there():
    texts = pd.Series(["2026-03-08T01:30:00", "2026-03-08T02:30:00"])  # 02:30 does not exist in Denver that night
    with pytest.raises(FeedError, match="no time zone is declared"):
        parse_time_column(texts, source="f", field="time", line_offset=2, error_type=FeedError, require_offset=False)
    with pytest.raises(FeedError) as info:
        parse_time_column(
            texts,
            source="f",
            field="time",
            line_offset=2,
            error_type=FeedError,
            require_offset=False,
            time_zone="America/Denver",
        )
    assert info.value.line == 3 and "does not exist" in info.value.message


_ISO = re.compile(r"\d{4}-\d\d-\d\d[Tt ]\d\d:\d\d(?::\d\d(?:\.\d+)?)?(?P<offset>[Zz]|[+-]\d\d(?::?\d\d)?)?")


@settings(max_examples=400, deadline=None)
@given(
    st.lists(
        st.one_of(
            st.from_regex(r"\A\d{4}-\d\d-\d\d[Tt ]\d\d:\d\d(:\d\d(\.\d{1,9})?)?([Zz]|[+-]\d\d(:?\d\d)?)?\Z"),
            st.text(alphabet="0123456789-:T tZz+.", max_size=30),
            st.text(max_size=12),
        ),
        min_size=1,
        max_size=20,
    )
)
def test_the_vectorised_shape_check_agrees_with_a_regular_expression(texts):
    stripped = np.array([t.strip() for t in texts], dtype=str)
    ok, has_offset = iso_shape(stripped)
    for text, got_ok, got_offset in zip(stripped, ok, has_offset):
        m = _ISO.fullmatch(str(text)) if str(text).isascii() and len(str(text)) <= 40 else None
        assert bool(got_ok) == (m is not None), text
        assert bool(got_offset) == (m is not None and m.group("offset") is not None), text


def test_every_refused_shape_has_a_message():
    for text in ("", "soon", "2026", "2026-01-16T", "2026-01-16T03:31:00Zulu", "2026-01-16T03:31:00+01:00:00"):
        what, hint = describe_bad_time(text)
        assert what and hint


def test_epoch_numbers_are_range_checked_and_the_unit_setting_is_named():
    good = epoch_times(
        np.array([1768534260.0]), "epoch_s", guessed=True, source="f", field="time", line_offset=2, error_type=FeedError
    )
    assert good.iloc[0] == pd.Timestamp("2026-01-16T03:31:00Z")
    ms = epoch_times(
        np.array([1768534260000.0]),
        "epoch_ms",
        guessed=False,
        source="f",
        field="time",
        line_offset=2,
        error_type=FeedError,
    )
    assert ms.iloc[0] == good.iloc[0]
    with pytest.raises(FeedError, match="looks like milliseconds.*feed.time_unit: epoch_ms"):
        epoch_times(
            np.array([1768534260000.0]),
            "epoch_s",
            guessed=True,
            source="f",
            field="time",
            line_offset=2,
            error_type=FeedError,
        )
    with pytest.raises(FeedError, match="outside the years"):
        epoch_times(
            np.array([np.inf]), "epoch_ms", guessed=False, source="f", field="time", line_offset=2, error_type=FeedError
        )


def test_a_feed_in_epoch_milliseconds_is_read_with_the_site_setting(tmp_path):
    feed = tmp_path / "ms.csv"
    feed.write_text(HEADER + "1768534260000,1.5,2.5,2.0,70\n1768534320000,1.5,2.5,2.0,70\n")
    with pytest.raises(FeedError, match="set feed.time_unit: epoch_ms"):
        read_feed(feed, FeedLayout())
    frame = read_feed(feed, FeedLayout(time_unit="epoch_ms")).frame
    assert list(frame["time"]) == [pd.Timestamp("2026-01-16T03:31:00Z"), pd.Timestamp("2026-01-16T03:32:00Z")]
    with pytest.raises(FeedError, match="where feed.time_unit is iso"):
        read_feed(feed, FeedLayout(time_unit="iso"))
    site = tmp_path / "site.yaml"
    site.write_text(
        "site: {name: t, latitude_deg: 1, longitude_deg: 1, dish_diameter_m: 30}\nfeed: {time_unit: epoch_ms}\n"
    )
    assert load_site(site).feed.time_unit == "epoch_ms"


# --- feed files --------------------------------------------------------------------------


def _rows(n: int, rh: float = 70.0, start: str = "2026-01-16T03:00:00Z") -> str:
    t0 = pd.Timestamp(start)
    return "".join(f"{(t0 + pd.Timedelta(minutes=k)):%Y-%m-%dT%H:%M:%SZ},1.5,2.5,2.0,{rh}\n" for k in range(n))


def test_a_half_written_last_line_is_ignored(tmp_path):
    """A logger writing "99.5" has got as far as "9": that row must not be read as 9 % humidity."""
    feed = tmp_path / "mast.csv"
    feed.write_text(HEADER + _rows(30, rh=99.5) + "2026-01-16T03:30:00Z,1.5,2.5,2.0,9")
    got = read_feed(feed, FeedLayout())
    assert len(got.frame) == 30 and got.quality.partial_last_line
    assert got.frame["rel_humidity_pct"].iloc[-1] == 99.5
    feed.write_text(HEADER + _rows(30, rh=99.5))
    assert not read_feed(feed, FeedLayout()).quality.partial_last_line


def test_a_half_written_fog_line_never_turns_into_scan(tmp_path, capsys):
    feed = tmp_path / "mast.csv"
    feed.write_text(HEADER + _rows(60, rh=99.5) + "2026-01-16T04:00:00Z,1.5,2.5,2.0,9")
    refs = tmp_path / "refs.csv"
    refs.write_text("time,air_temp_c,note\n2026-01-16T02:00:00Z,2.0,x\n")
    status = main(["check", "--feed", str(feed), "--references", str(refs), "--at", "2026-01-16T04:00:30Z", "--json"])
    doc = json.loads(capsys.readouterr().out)
    assert status != 0 and doc["verdict"] != "scan"


def test_a_half_written_json_line_is_ignored(tmp_path):
    feed = tmp_path / "mast.jsonl"
    row = {
        "time": "2026-01-16T03:00:00Z",
        "wind_mean_ms": 1.5,
        "wind_gust_ms": 2.5,
        "air_temp_c": 2.0,
        "rel_humidity_pct": 99.5,
    }
    feed.write_text(json.dumps(row) + "\n" + json.dumps(dict(row, time="2026-01-16T03:01:00Z"))[:-8])
    assert len(read_feed(feed, FeedLayout()).frame) == 1


def test_byte_order_mark_and_crlf_feeds_are_read(tmp_path):
    csv_feed = tmp_path / "bom.csv"
    csv_feed.write_bytes(b"\xef\xbb\xbf" + (HEADER + _rows(5)).replace("\n", "\r\n").encode())
    assert len(read_feed(csv_feed, FeedLayout()).frame) == 5
    jsonl = tmp_path / "bom.jsonl"
    row = {
        "time": "2026-01-16T03:00:00Z",
        "wind_mean_ms": 1.5,
        "wind_gust_ms": 2.5,
        "air_temp_c": 2.0,
        "rel_humidity_pct": 70,
    }
    jsonl.write_bytes(b"\xef\xbb\xbf" + (json.dumps(row) + "\r\n").encode())
    assert len(read_feed(jsonl, FeedLayout()).frame) == 1


def test_errors_in_the_tail_of_a_large_feed_name_the_file_line(tmp_path, monkeypatch):
    feed = tmp_path / "big.csv"
    body = _rows(2000)
    lines = body.splitlines(keepends=True)
    lines[1990] = lines[1990].replace(",2.0,", ",warm,")
    feed.write_text(HEADER + "".join(lines))
    with pytest.raises(FeedError) as info:
        read_feed(feed, FeedLayout(), tail_bytes=4000)  # reads only the last ~4 kB
    assert info.value.line == 1992 and "'warm' is not a number" in info.value.message
    monkeypatch.setattr(feedfile, "MAX_LINE_COUNT_BYTES", 1000)  # too far to count: say where instead
    with pytest.raises(FeedError) as info:
        read_feed(feed, FeedLayout(), tail_bytes=4000)
    assert info.value.line is None and "after byte" in info.value.message


def test_a_huge_sparse_feed_is_read_from_its_tail_only(tmp_path):
    """3 GB, almost all of it a hole: the call reads the tail, and counts no lines unless a message needs one."""
    feed = tmp_path / "sparse.csv"
    tail = _rows(3000, start="2026-01-16T01:00:00Z").encode()
    with feed.open("wb") as fh:
        fh.write((HEADER + _rows(200)).encode())
        fh.seek(3_000_000_000 - len(tail))
        fh.write(tail)
    got = read_feed(feed, FeedLayout(), tail_bytes=100_000)
    assert got.frame["time"].iloc[-1] == pd.Timestamp("2026-01-16T01:00:00Z") + pd.Timedelta(minutes=2999)
    assert 1000 < len(got.frame) < 3000
    with feed.open("r+b") as fh:  # now the last line has no end in the tail
        fh.truncate(3_000_000_000 + 200_000)
    with pytest.raises(FeedError, match="no complete line in the last 100,000 bytes of the feed"):
        read_feed(feed, FeedLayout(), tail_bytes=100_000)


@pytest.mark.parametrize("value", ["true", "false"])
def test_json_booleans_are_never_numbers(tmp_path, value):
    feed = tmp_path / "mast.jsonl"
    feed.write_text(
        '{"time": "2026-01-16T03:00:00Z", "wind_mean_ms": ' + value + ', "wind_gust_ms": 2.5, '
        '"air_temp_c": 2.0, "rel_humidity_pct": 70}\n'
    )
    with pytest.raises(FeedError, match=f"{value} where a number is expected"):
        read_feed(feed, FeedLayout())


def test_words_true_in_a_csv_number_column_are_refused(tmp_path):
    feed = tmp_path / "mast.csv"
    feed.write_text(HEADER + "2026-01-16T03:00:00Z,true,2.5,2.0,70\n")
    with pytest.raises(FeedError, match="true/false where a number is expected"):
        read_feed(feed, FeedLayout())
    feed.write_text(HEADER + "2026-01-16T03:00:00Z,true,2.5,2.0,70\n2026-01-16T03:01:00Z,1.5,2.5,2.0,70\n")
    with pytest.raises(FeedError, match="true where a number is expected"):
        read_feed(feed, FeedLayout())


# --- YAML and JSON -----------------------------------------------------------------------


def test_a_duplicated_key_names_both_lines():
    text = "thresholds:\n  high_frequency_wind_limit_ms: 4\n  min_p_usable: 0.5\n  high_frequency_wind_limit_ms: 40\n"
    with pytest.raises(SiteError) as info:
        parse_yaml_text(text, "site.yaml", SiteError)
    assert info.value.line == 4 and "given twice (first at line 2)" in info.value.message
    nested = "a:\n  - {x: 1, x: 2}\n"
    with pytest.raises(SiteError, match="'x' given twice"):
        parse_yaml_text(nested, "s.yaml", SiteError)
    data, _ = parse_yaml_text(text, "site.yaml", SiteError, duplicate_keys=False)  # the rule lint reports them itself
    assert data["thresholds"]["high_frequency_wind_limit_ms"] == 40


@pytest.mark.parametrize("literal", ["1" * 400, "-" + "9" * 30, "1.0e+400", "1_000_000_000_000_000"])
def test_numbers_too_large_for_a_physical_value_are_refused(literal):
    with pytest.raises(RulesError, match="is too large"):
        parse_yaml_text(f"value: {literal}\n", "r.yaml", RulesError)


def test_ordinary_and_special_yaml_numbers_pass_to_the_schema():
    data, _ = parse_yaml_text("a: 4.0\nb: -12\nc: .inf\nd: 0x1F\ne: 1e400\n", "s.yaml", SiteError)
    assert data["a"] == 4.0 and data["b"] == -12 and data["c"] == float("inf") and data["d"] == 31
    assert data["e"] == "1e400"  # YAML 1.1 reads this as text; the schema refuses it as not a number


def test_a_site_number_that_overflows_is_one_line(tmp_path):
    site = tmp_path / "site.yaml"
    site.write_text("site: {name: t, latitude_deg: 1, longitude_deg: 1, dish_diameter_m: " + "9" * 400 + "}\n")
    with pytest.raises(SiteError, match="is too large"):
        load_site(site)


@pytest.mark.parametrize(
    "zone, words",
    [
        ("America", "'America' is a region, not a time zone"),
        ("../../etc/passwd", "unknown time zone"),
        ("Mars/Olympus", "unknown time zone"),
        ("UTC\0", "unknown time zone"),
    ],
)
def test_time_zones_are_zones(tmp_path, zone, words):
    site = tmp_path / "site.yaml"
    site.write_text(
        f"site: {{name: t, latitude_deg: 1, longitude_deg: 1, dish_diameter_m: 30, time_zone: {json.dumps(zone)}}}\n"
    )
    with pytest.raises(SiteError) as info:
        load_site(site)
    assert words in info.value.one_line()


def test_a_model_nested_100000_levels_is_refused_before_parsing():
    with pytest.raises(ModelError, match="nested 100000 levels deep"):
        parse_model("[" * 100_000 + "]" * 100_000, "m.json")
    with pytest.raises(ModelError, match="nested 40 levels deep"):
        parse_model('{"a": "[[[[", "b": ' + "[" * 39 + "]" * 39 + "}", "m.json")


def test_model_numbers_never_overflow():
    text = (CORPUS / "model_huge_int.json").read_text()
    with pytest.raises(ModelError, match=r"\(400 digits\) is too large"):
        parse_model(text, "m.json")
    with pytest.raises(ModelError, match=r"\(5000 digits\) is too large"):  # past Python's 4300-digit limit
        parse_model(text.replace("7" * 400, "7" * 5000), "m.json")


def test_a_model_saved_with_a_byte_order_mark_loads(tmp_path):
    bundled = CORPUS / "model_wrong_unit.json"
    path = tmp_path / "model.json"
    path.write_bytes(b"\xef\xbb\xbf" + bundled.read_text().replace('"unit": "kn"', '"unit": "m/s"').encode())
    from advisor.model.inference import load_model

    assert set(load_model(path).methods) == {"scan", "astronomical"}


# --- text that reaches a terminal --------------------------------------------------------


@pytest.mark.parametrize(
    "raw, clean",
    [
        ("Larch\x1b[2J Basin", "Larch Basin"),
        ("\x1b]0;owned\x07title", "title"),
        ("\x1b]8;;http://x\x1b\\link\x1b]8;;\x1b\\", "link"),
        ("a\x9b31mb", "ab"),
        ("bell\x07 and back\x08space", "bell and backspace"),
        ("over\rwrite", "overwrite"),
        ("right\u202eto left", "rightto left"),
        ("two\nlines\tand tab", "two lines and tab"),
        ("Café µm ±0.5 °C", "Café µm ±0.5 °C"),
    ],
)
def test_control_characters_and_escape_sequences_are_stripped(raw, clean):
    assert clean_text(raw) == clean


def test_newlines_and_tabs_can_be_kept():
    assert clean_text("a\nb\tc\r\n", keep_newlines=True, keep_tabs=True) == "a\nb\tc\n"


def test_error_lines_are_safe_for_a_terminal_and_bounded():
    error = FeedError(
        "bad value '\x1b[31mred\x1b[0m'", source="/data/" + "d" * 500 + "/feed\x1b]0;x\x07.csv", line=3, hint="fix\nit"
    )
    line = error.one_line()
    assert "\x1b" not in line and "\x07" not in line and "\n" not in line
    assert "feed.csv:3: bad value 'red' (fix it)" in line and len(line) < 300 and "…" in line
    assert shorten("abc", 10) == "abc" and len(shorten("x" * 1000, 50)) == 50


def test_history_and_rule_files_saved_with_a_byte_order_mark_are_read(tmp_path):
    from advisor.io.history import HistoryError, read_history
    from advisor.rules.loader import load_rules

    history = tmp_path / "history.csv"
    history.write_bytes(b"\xef\xbb\xbftime,method,usable\r\n2026-01-01T03:00:00Z,scan,yes\r\n")
    assert list(read_history(history).frame["method"]) == ["scan"]
    history.write_text("time,method,usable\n2026-01-01T03:00:00Z,scan,yes\n", encoding="utf-16")
    with pytest.raises(HistoryError, match="UTF-16 text, not UTF-8"):
        read_history(history)
    rules = tmp_path / "rules.yaml"
    rules.write_bytes(
        b"\xef\xbb\xbfrules:\n  - id: bom_rule\n    applies_to: scan\n    condition: wind_mean_ms > 30\n"
        b"    effect: warn\n    message: m\n"
    )
    from advisor.catalogue import CATALOGUE

    assert [r.id for r in load_rules([(rules, "site")], CATALOGUE)] == ["bom_rule"]
