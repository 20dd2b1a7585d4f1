"""Malformed and hostile inputs: one clear line naming the file (and line or field), exit 2 —
or 12 where the data are merely insufficient — no traceback, nothing written or overwritten.

The corpus lives in tests/bad_inputs/; each case below names its file, the command, the exit
status and a phrase the message must contain.
"""

from __future__ import annotations

import hashlib
import os
import re
import signal
from pathlib import Path

import pytest

from advisor.commands.main import main

CORPUS = Path(__file__).resolve().parent / "bad_inputs"
GOOD_FEED = str(CORPUS / "feed_good.csv")
AT = "2026-01-16T04:00:00Z"
PWNED = Path("/tmp/advisor_pwned")


def check_feed(name):
    return ["check", "--feed", str(CORPUS / name), "--at", AT]


def check_site(name):
    return ["check", "--site", str(CORPUS / name), "--feed", GOOD_FEED, "--at", AT]


def check_rules(name):
    return ["check", "--feed", GOOD_FEED, "--at", AT, "--rules", str(CORPUS / name)]


def check_refs(name):
    return ["check", "--feed", GOOD_FEED, "--at", AT, "--references", str(CORPUS / name)]


CASES = [
    # feeds
    ("feed_empty.csv", check_feed, 2, "empty"),
    ("feed_binary.csv", check_feed, 2, "binary"),
    ("feed_semicolon.csv", check_feed, 2, "delimiter"),
    ("feed_missing_columns.csv", check_feed, 2, "missing required column"),
    ("feed_header_only.csv", check_feed, 2, "no data rows"),
    ("feed_bad_timestamp.csv", check_feed, 2, "cannot read timestamp"),
    ("feed_no_offset.csv", check_feed, 2, "no utc offset"),
    ("feed_mixed_offsets.csv", check_feed, 2, "no utc offset while others do"),
    ("feed_conflicting_duplicates.csv", check_feed, 2, "appears twice with different values"),
    ("feed_reversed.csv", check_feed, 2, "go back in time"),
    ("feed_nan_run.csv", check_feed, 12, "undetermined"),
    ("feed_rh_fraction_mixed.csv", check_feed, 2, "fraction in some rows and percent"),
    ("feed_impossible_temperature.csv", check_feed, 12, "undetermined"),
    ("feed_negative_wind.csv", check_feed, 12, "undetermined"),
    ("feed_in_the_future.csv", lambda n: ["check", "--feed", str(CORPUS / n)], 2, "after the current time"),
    ("feed_word_in_number.csv", check_feed, 2, "'calm' is not a number"),
    ("feed_latin1.csv", check_feed, 2, "utf-8"),
    ("feed_bad_json.jsonl", check_feed, 2, "invalid json"),
    ("feed_json_array.jsonl", check_feed, 2, "expected a json object"),
    ("does_not_exist.csv", check_feed, 2, "not found"),
    ("feed_epoch_ms.csv", check_feed, 2, "set feed.time_unit: epoch_ms"),
    ("feed_year_2300.csv", check_feed, 2, ":21: time: time '2300-01-16t03:50:00z' is outside the years"),
    ("feed_truncated_time.csv", check_feed, 2, ":21: time: timestamp '2026-01-16t03:5' is incomplete"),
    ("feed_malformed_offset.csv", check_feed, 2, ":2: time: utc offset '+5:30'"),
    ("feed_utf16.csv", check_feed, 2, "utf-16 text, not utf-8 (re-save it as utf-8"),
    ("feed_huge_number.csv", check_feed, 2, ":21: wind_mean_ms: a number too large"),
    ("feed_duplicate_column.csv", check_feed, 2, ":1: column 'wind_gust_ms' appears twice"),
    ("feed_no_complete_line.csv", check_feed, 2, "no line ends with a newline"),
    ("feed_jsonl_true.jsonl", check_feed, 2, ":30: wind_mean_ms: true where a number is expected"),
    ("feed_jsonl_huge_int.jsonl", check_feed, 2, ":30: wind_gust_ms: value 999999999999… (400 digits)"),
    ("feed_jsonl_duplicate_key.jsonl", check_feed, 2, ":30: invalid json: key 'wind_mean_ms' given twice"),
    ("feed_jsonl_deep.jsonl", check_feed, 2, ":30: json nested too deeply"),
    # site files
    ("site_syntax_error.yaml", check_site, 2, "yaml syntax error"),
    ("site_tab_indent.yaml", check_site, 2, "tab"),
    ("site_billion_laughs.yaml", check_site, 2, "anchors and aliases"),
    ("site_python_tag.yaml", check_site, 2, "tag not allowed"),
    ("site_wrong_type.yaml", check_site, 2, "site.latitude_deg: expected a number"),
    ("site_unknown_key.yaml", check_site, 2, "did you mean 'high_frequency_wind_limit_ms'"),
    ("site_bad_time_zone.yaml", check_site, 2, "unknown time zone"),
    ("site_bad_unit.yaml", check_site, 2, "unknown unit"),
    ("site_bad_calibrator.yaml", check_site, 2, "ra out of range"),
    ("site_no_site_section.yaml", check_site, 2, "missing section"),
    ("site_top_is_list.yaml", check_site, 2, "expected a mapping"),
    ("site_empty.yaml", check_site, 2, "site file is empty"),
    ("site_latitude_out_of_range.yaml", check_site, 2, "outside -90..90"),
    ("site_min_above_max_elevation.yaml", check_site, 2, "must be above min_calibrator_elevation_deg"),
    ("site_time_zone_folder.yaml", check_site, 2, ":6: site.time_zone: 'america' is a region, not a time zone"),
    (
        "site_duplicate_key.yaml",
        check_site,
        2,
        ":10:3: key 'high_frequency_wind_limit_ms' given twice (first at line 8)",
    ),
    ("site_huge_number.yaml", check_site, 2, ":5:20: number 999999999999…999999 (400 digits) is too large"),
    ("site_bad_time_unit.yaml", check_site, 2, "feed.time_unit: unknown time unit 'unix'"),
    ("site_utf16.yaml", check_site, 2, "site file is utf-16 text"),
    ("site_terminal_escape.yaml", check_site, 2, "unknown key: it contains control characters"),
    ("site_todo_left.yaml", check_site, 2, ":2: site.name: still says todo"),
    ("site_gust_factor_and_gust.yaml", check_site, 2, "feed.gust_factor: the feed maps a gust column and also sets"),
    ("site_two_time_columns_no_format.yaml", check_site, 2, "feed.time_format: a date and a time column need"),
    ("site_missing_code_boolean.yaml", check_site, 2, "feed.missing: expected a list of numbers or words"),
    ("site_depth_without_hours.yaml", check_site, 2, "a depth needs the hours it was collected over"),
    ("site_offset_out_of_range.yaml", check_site, 2, "feed.time_zone: offset 'utc+15:00' is outside"),
    ("site_bad_time_label.yaml", check_site, 2, "feed.time_label: unknown time label 'middle'"),
    ("site_fractional_site_zone.yaml", check_site, 2, "site.time_zone: offset 'utc+05:30' is not a whole number"),
    ("site_time_format_with_zone.yaml", check_site, 2, "feed.time_format: a zone in the time text is not read"),
    # rule files
    ("rules_syntax_error.yaml", check_rules, 2, "yaml syntax error"),
    ("rules_unknown_feature.yaml", check_rules, 2, "wind_mean_ms"),
    ("rules_hostile_import.yaml", check_rules, 2, "condition"),
    ("rules_hostile_open.yaml", check_rules, 2, "condition"),
    ("rules_attribute_access.yaml", check_rules, 2, "condition"),
    ("rules_bad_effect.yaml", check_rules, 2, "effect"),
    ("rules_flag_vs_number.yaml", check_rules, 2, "flag"),
    ("rules_unit_mismatch.yaml", check_rules, 2, "degc"),
    ("rules_unknown_message_value.yaml", check_rules, 2, "wind_speed"),
    ("rules_bad_applies_to.yaml", check_rules, 2, "applies_to"),
    ("rules_duplicate_ids.yaml", check_rules, 2, "duplicate"),
    ("rules_not_a_list.yaml", check_rules, 2, "list"),
    ("rules_python_tag.yaml", check_rules, 2, "tag not allowed"),
    ("rules_empty.yaml", check_rules, 2, "rule file is empty (a truncated or unsaved file looks the same"),
    ("rules_huge_number.yaml", check_rules, 2, ":6:15: number 111111111111…111111 (400 digits) is too large"),
    ("rules_utf16.yaml", check_rules, 2, "rule file is utf-16 text"),
    (
        "rules_format_width.yaml",
        check_rules,
        2,
        ":6:20: rule wide_message.message: bad format '>1000000' for 'wind_mean_ms': format width 1000000 is above 40",
    ),
    ("rules_format_precision.yaml", check_rules, 2, "format precision 99999 is above 12"),
    ("rules_escape_in_key.yaml", check_rules, 2, ":7:5: rule fine: unknown key 'severity'"),
    # model files (check falls back to rules only with a note; `model show` refuses them)
    ("model_truncated.json", lambda n: ["model", "show", str(CORPUS / n)], 2, "truncated json"),
    ("model_not_json.json", lambda n: ["model", "show", str(CORPUS / n)], 2, "invalid json"),
    ("model_pickle.json", lambda n: ["model", "show", str(CORPUS / n)], 2, "not utf-8"),
    ("model_wrong_schema.json", lambda n: ["model", "show", str(CORPUS / n)], 2, "schema version 99"),
    ("model_unknown_feature.json", lambda n: ["model", "show", str(CORPUS / n)], 2, "unknown feature"),
    ("model_wrong_unit.json", lambda n: ["model", "show", str(CORPUS / n)], 2, "'kn' in the model"),
    ("model_deep.json", lambda n: ["model", "show", str(CORPUS / n)], 2, "json nested 100000 levels deep"),
    ("model_huge_int.json", lambda n: ["model", "show", str(CORPUS / n)], 2, "(400 digits) is too large"),
    ("model_duplicate_key.json", lambda n: ["model", "show", str(CORPUS / n)], 2, "duplicate key 'format'"),
    ("model_utf16.json", lambda n: ["model", "show", str(CORPUS / n)], 2, "model file is utf-16 text"),
    # reference registries
    ("refs_bad_time.csv", check_refs, 2, "time"),
    ("refs_missing_column.csv", check_refs, 2, "missing column"),
    ("refs_bad_temperature.csv", check_refs, 2, "not a number"),
    ("refs_year_2300.csv", check_refs, 2, ":2: time: time '2300-01-15t09:00:00z' is outside the years"),
    ("refs_utf16.csv", check_refs, 2, "reference registry is utf-16 text"),
    ("refs_huge_number.csv", check_refs, 2, ":2: air_temp_c: air_temp_c 111111111111… (400 characters)"),
    ("refs_duplicate_column.csv", check_refs, 2, ":1: column 'time' appears twice"),
]

ARG_CASES = [
    (["check", "--freq", "-5"], "--freq"),
    (["check", "--freq", "3THz"], "outside"),
    (["check", "--freq", "eighty-six"], "cannot read frequency"),
    (["check", "--at", "yesterday-ish"], "cannot read time"),
    (["check", "--at", "2026-01-15T09:00"], "--at"),
    (["check", "--at", "9999-12-31T23:59:59Z"], "--at: time '9999-12-31T23:59:59Z' is outside the years 1900..2199"),
    (["check", "--at", "2300-01-01T00:00:00Z"], "--at: time '2300-01-01T00:00:00Z' is outside the years"),
    (
        ["check", "--at", "1768534260000"],
        "--at: '1768534260000' is a number, not a time (as epoch milliseconds it would be 2026-01-16T03:31:00Z)",
    ),
    (["check", "--at", "1768534260"], "as epoch seconds it would be 2026-01-16T03:31:00Z"),
    (["check", "--at", "2026-01-16T03:3Z"], "--at: timestamp '2026-01-16T03:3Z' is incomplete"),
    (["check", "--at", "2026-01-16T03:30:00+5:30"], "--at: UTC offset '+5:30' of timestamp"),
    (["check", "--at", "2026-01-16"], "--at: timestamp '2026-01-16' has a date but no time of day"),
    (
        ["replay", "--feed", "x.csv", "--from", "2026-01-16T03:30:00 UTC"],
        "--from: timestamp '2026-01-16T03:30:00 UTC' names its zone as 'UTC'",
    ),
    (["tick", "--state-dir", "/x" * 3000], "above the system's limit"),
    (
        ["tick", "--state-dir", "/tmp/" + "/".join(["d" * 200] * 20) + "/" + "x" * 35],
        "--state-dir: the state dir path is 4,060 bytes long",
    ),
    (["tick", "--state-dir", "state\0dir"], "the state dir path contains a NUL character"),
    (["check", "--no-such-option"], "unrecognized arguments"),
    (["no-such-command"], "invalid choice"),
    (["reference", "add", "--references", "/tmp/x.csv", "--time", "soon", "--air-temp-c", "1"], "--time"),
    (["reference", "add", "--references", "/tmp/x.csv", "--time", "now", "--air-temp-c", "hot"], "--air-temp-c"),
]


def _snapshot(folder: Path) -> dict:
    return {p.name: hashlib.sha256(p.read_bytes()).hexdigest() for p in folder.iterdir() if p.is_file()}


def test_corpus_is_large_enough():
    assert len(CASES) + len(ARG_CASES) >= 40
    assert all((CORPUS / name).exists() for name, *_ in CASES if name != "does_not_exist.csv")


@pytest.mark.parametrize("name, argv, status, phrase", CASES, ids=[c[0] for c in CASES])
def test_bad_input_gives_one_clear_line(capsys, tmp_path, monkeypatch, name, argv, status, phrase):
    monkeypatch.chdir(tmp_path)
    before = _snapshot(CORPUS)
    PWNED.unlink(missing_ok=True)
    got = main(argv(name))
    out, err = capsys.readouterr()
    assert got == status, (out, err)
    assert "Traceback" not in out + err
    if status == 2:
        lines = err.strip().splitlines()
        assert len(lines) == 1, err
        assert lines[0].startswith("advisor: error: ")
        assert name in lines[0]
        assert phrase in lines[0].lower(), lines[0]
        assert out == ""
    else:
        assert phrase in out.lower()
        assert "VERDICT: SCAN" not in out
    assert _snapshot(CORPUS) == before  # nothing overwritten
    assert list(tmp_path.iterdir()) == []  # nothing written
    assert not PWNED.exists()  # no code ran


@pytest.mark.parametrize("argv, phrase", ARG_CASES, ids=[" ".join(a)[:70].replace("\0", "\\0") for a, _ in ARG_CASES])
def test_bad_arguments_give_one_line_exit_2(capsys, argv, phrase):
    with pytest.raises(SystemExit) if argv[0] == "no-such-command" or "--no-such-option" in argv else _null():
        status = main(argv)
        assert status == 2
    out, err = capsys.readouterr()
    lines = err.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("advisor: error: "), err
    assert phrase in lines[0]
    assert "Traceback" not in err


class _null:
    def __enter__(self):
        return self

    def __exit__(self, *exc):
        return False


def test_ten_thousand_rules_are_refused_quickly(capsys, tmp_path):
    big = tmp_path / "many.yaml"
    body = "".join(
        f"  - id: r{i}\n    applies_to: scan\n    condition: wind_mean_ms > {i % 20}\n"
        f"    effect: warn\n    message: m\n"
        for i in range(10_000)
    )
    big.write_text("rules:\n" + body)
    status = main(["check", "--feed", GOOD_FEED, "--at", AT, "--rules", str(big)])
    err = capsys.readouterr().err
    assert status == 2 and "more than" in err and len(err.strip().splitlines()) == 1


def test_huge_model_file_is_refused(capsys, tmp_path):
    big = tmp_path / "huge_model.json"
    big.write_text('{"format": "advisor-site-model", "pad": "' + "x" * 3_000_000 + '"}')
    assert main(["model", "show", str(big)]) == 2
    err = capsys.readouterr().err
    assert len(err.strip().splitlines()) == 1 and "huge_model.json" in err


def test_broken_model_makes_check_fall_back_to_rules_only(capsys):
    status = main(["check", "--feed", GOOD_FEED, "--at", AT, "--model", str(CORPUS / "model_truncated.json"), "--json"])
    out, err = capsys.readouterr()
    import json

    doc = json.loads(out)
    assert status == 10 and doc["verdict"] == "astronomical"  # no reference in force for January
    assert all(c["p_usable"] is None for c in doc["candidates"].values())
    assert any("rests on rules and the error budget only" in note for note in doc["notes"])
    assert "falling back to rules only" in err


# --- paths that are not regular files, or cannot name one --------------------------------


def _special(kind: str, where: Path) -> str:
    if kind == "fifo":
        path = where / "input.fifo"
        os.mkfifo(path)
        return str(path)
    return {
        "device": "/dev/zero",
        "directory": str(where),
        "nul": "input\0.csv",
        "path_too_long": "/x" * 3000,
        "name_too_long": "/tmp/" + "n" * 300,
    }[kind]


SPECIAL_KINDS = {
    "fifo": "named pipe (fifo)",
    "device": "character device",
    "directory": "is a directory",
    "nul": "nul character",
    "path_too_long": "above the system's limit",
    "name_too_long": "a name in the",
}
FILE_OPTIONS = {
    "--feed": lambda p: ["check", "--feed", p, "--at", AT],
    "--site": lambda p: ["check", "--site", p, "--feed", GOOD_FEED, "--at", AT],
    "--rules": lambda p: ["check", "--feed", GOOD_FEED, "--at", AT, "--rules", p],
    "--references": lambda p: ["check", "--feed", GOOD_FEED, "--at", AT, "--references", p],
    "model show": lambda p: ["model", "show", p],
    "train --history": lambda p: ["train", "--history", p, "--out", "/nonexistent-folder/model.json"],
}


@pytest.mark.parametrize("option", FILE_OPTIONS)
@pytest.mark.parametrize("kind", SPECIAL_KINDS)
def test_special_files_and_impossible_paths_give_one_line_without_blocking(capsys, tmp_path, kind, option):
    """A FIFO is never opened for a blocking read (the alarm turns a hang into a failure)."""
    path = _special(kind, tmp_path)
    signal.signal(signal.SIGALRM, _hung)
    signal.alarm(60)
    try:
        status = main(FILE_OPTIONS[option](path))
    finally:
        signal.alarm(0)
    out, err = capsys.readouterr()
    lines = err.strip().splitlines()
    assert status == 2 and out == "", (out, err)
    assert len(lines) == 1 and lines[0].startswith("advisor: error: "), err
    assert SPECIAL_KINDS[kind] in lines[0].lower(), lines[0]
    assert len(lines[0]) < 800 and "\0" not in lines[0]


def _hung(*_):
    raise AssertionError("the command blocked on a pipe or device")


# --- text from files that reaches a terminal or mail ---------------------------------------

_CONTROL = re.compile("[\x00-\x08\x0b-\x1f\x7f-\x9f\u202a-\u202e\u2066-\u2069]")


@pytest.mark.parametrize(
    "argv",
    [
        ["check", "--site", str(CORPUS / "site_escape_in_name.yaml"), "--feed", GOOD_FEED, "--at", AT],
        ["check", "--site", str(CORPUS / "site_escape_in_name.yaml"), "--feed", GOOD_FEED, "--at", AT, "--json"],
        [
            "check",
            "--feed",
            GOOD_FEED,
            "--at",
            AT,
            "--rules",
            str(CORPUS / "rules_escape_in_message.yaml"),
            "--details",
        ],
        ["check", "--feed", GOOD_FEED, "--at", AT, "--rules", str(CORPUS / "rules_escape_in_message.yaml"), "--json"],
        ["rules", "explain", "--feed", GOOD_FEED, "--at", AT, "--rules", str(CORPUS / "rules_escape_in_message.yaml")],
    ],
    ids=["site-plain", "site-json", "rule-plain", "rule-json", "rules-explain"],
)
def test_escape_sequences_in_files_never_reach_the_output(capsys, argv):
    status = main(argv)
    out, err = capsys.readouterr()
    assert status in (0, 10, 11, 12), err
    assert not _CONTROL.findall(out.replace("\n", "")) and not _CONTROL.findall(err.replace("\n", ""))
    assert "Larch Basin [/bold] (invented)" in out or "Look out" in out


def test_escape_sequences_in_a_rule_file_never_reach_lint_or_show(capsys):
    rules = str(CORPUS / "rules_escape_in_message.yaml")
    for argv in (
        ["rules", "lint", str(CORPUS / "rules_escape_in_key.yaml")],
        ["rules", "show", "--rules", rules],
        ["rules", "lint", rules],
    ):
        main(argv)
        out, err = capsys.readouterr()
        assert not _CONTROL.findall((out + err).replace("\n", "")), argv


def test_escape_sequences_in_a_model_file_never_reach_model_show(capsys):
    assert main(["model", "show", str(CORPUS / "model_escape_in_training.json")]) == 0
    out = capsys.readouterr().out
    assert "site: Larch Basin (invented)" in out and "history: history.csv" in out
    assert not _CONTROL.findall(out.replace("\n", ""))


def test_escape_sequences_never_reach_the_tick_pages(capsys, tmp_path):
    state = tmp_path / "state"
    status = main(
        [
            "tick",
            "--site",
            str(CORPUS / "site_escape_in_name.yaml"),
            "--feed",
            GOOD_FEED,
            "--at",
            AT,
            "--rules",
            str(CORPUS / "rules_escape_in_message.yaml"),
            "--state-dir",
            str(state),
        ]
    )
    out, err = capsys.readouterr()
    assert status in (0, 10, 11, 12), err
    for text in [out, *((state / n).read_text() for n in ("advisory.txt", "advisory.json", "advisory.html"))]:
        assert not _CONTROL.findall(text.replace("\n", ""))
    assert "Larch Basin [/bold] (invented)" in (state / "advisory.html").read_text()


# --- model arithmetic ------------------------------------------------------------------------


def test_a_model_that_overflows_leaves_the_call_to_the_rules_and_says_so(capsys, tmp_path):
    import json

    from .test_tick import make_site

    site = make_site(tmp_path)  # three hours of feed: every input of the model is there
    argv = ["check", "--site", str(site), "--at", AT, "--json"]
    status = main([*argv, "--model", str(CORPUS / "model_overflow.json")])
    out, err = capsys.readouterr()
    doc = json.loads(out)
    assert err == ""  # no numpy warnings
    assert status == main([*argv, "--model", "none"]) and all(c["p_usable"] is None for c in doc["candidates"].values())
    notes = [r["message"] for r in doc["reasons"] if r["rule"].startswith("model.")]
    assert notes and all("arithmetic failed (overflow) for these inputs: rules only" in n for n in notes)
    capsys.readouterr()
    assert main(["model", "show", str(CORPUS / "model_overflow.json")]) == 0
    assert "Warning" not in capsys.readouterr().err


# --- tick: bad input never leaves an old scan standing ----------------------------------------


@pytest.mark.parametrize(
    "option, name, status",
    [
        ("--site", "site_syntax_error.yaml", 2),
        ("--rules", "rules_syntax_error.yaml", 2),
        ("--rules", "rules_format_width.yaml", 2),
        ("--references", "refs_bad_time.csv", 2),
        ("--feed", "feed_epoch_ms.csv", 12),
        ("--feed", "feed_binary.csv", 12),
    ],
)
def test_tick_on_bad_input_replaces_a_scan_with_an_undetermined_advisory(capsys, tmp_path, option, name, status):
    import json

    from .test_tick import make_site, tick_argv

    site = make_site(tmp_path)
    state = tmp_path / "state"
    assert main(tick_argv(site, state)) == 0
    assert json.loads((state / "advisory.json").read_text())["verdict"] == "scan"
    capsys.readouterr()
    argv = tick_argv(CORPUS / name if option == "--site" else site, state)
    if option != "--site":
        argv += [option, str(CORPUS / name)]
    got = main(argv)
    out, err = capsys.readouterr()
    assert got == status, err
    doc = json.loads((state / "advisory.json").read_text())
    assert doc["verdict"] == "undetermined" and name in doc["reasons"][0]["message"]
    if status == 2:
        assert len(err.strip().splitlines()) == 1 and err.startswith("advisor: error: ") and name in err


# --- a 10 GB feed ----------------------------------------------------------------------------


def test_check_on_a_ten_gigabyte_sparse_feed_reads_its_tail_and_finishes(capsys, tmp_path):
    """Most of the file is a hole: check reads the end only and counts no lines (no timing here)."""
    feed = tmp_path / "huge.csv"
    head = (
        "time,wind_mean_ms,wind_gust_ms,air_temp_c,rel_humidity_pct\n"
        + "".join(f"2026-01-10T00:{m:02d}:00Z,1.5,2.5,2.0,70\n" for m in range(60)) * 4
    )
    tail = "".join(f"2026-01-16T{3 + m // 60:02d}:{m % 60:02d}:00Z,1.5,2.5,2.0,70\n" for m in range(61))
    with feed.open("wb") as fh:
        fh.write(head.encode())
        fh.seek(10 * 1024**3 - len(tail))
        fh.write(tail.encode())
    status = main(["check", "--feed", str(feed), "--at", AT])
    out, err = capsys.readouterr()
    assert status in (0, 10, 11, 12) and "VERDICT" in out, err
    hole = tmp_path / "hole.csv"
    with hole.open("wb") as fh:
        fh.truncate(10 * 1024**3)
    status = main(["check", "--feed", str(hole), "--at", AT])
    out, err = capsys.readouterr()
    assert status == 2 and out == "" and len(err.strip().splitlines()) == 1 and "hole.csv" in err
