"""Malformed and hostile inputs: one clear line naming the file (and line or field), exit 2 —
or 12 where the data are merely insufficient — no traceback, nothing written or overwritten.

The corpus lives in tests/bad_inputs/; each case below names its file, the command, the exit
status and a phrase the message must contain.
"""

from __future__ import annotations

import hashlib
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
    # model files (check falls back to rules only with a note; `model show` refuses them)
    ("model_truncated.json", lambda n: ["model", "show", str(CORPUS / n)], 2, "truncated json"),
    ("model_not_json.json", lambda n: ["model", "show", str(CORPUS / n)], 2, "invalid json"),
    ("model_pickle.json", lambda n: ["model", "show", str(CORPUS / n)], 2, "not utf-8"),
    ("model_wrong_schema.json", lambda n: ["model", "show", str(CORPUS / n)], 2, "schema version 99"),
    ("model_unknown_feature.json", lambda n: ["model", "show", str(CORPUS / n)], 2, "unknown feature"),
    ("model_wrong_unit.json", lambda n: ["model", "show", str(CORPUS / n)], 2, "'kn' in the model"),
    # reference registries
    ("refs_bad_time.csv", check_refs, 2, "time"),
    ("refs_missing_column.csv", check_refs, 2, "missing column"),
    ("refs_bad_temperature.csv", check_refs, 2, "not a number"),
]

ARG_CASES = [
    (["check", "--freq", "-5"], "--freq"),
    (["check", "--freq", "3THz"], "outside"),
    (["check", "--freq", "eighty-six"], "cannot read frequency"),
    (["check", "--at", "yesterday-ish"], "cannot read time"),
    (["check", "--at", "2026-01-15T09:00"], "--at"),
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
    assert _snapshot(CORPUS) == before          # nothing overwritten
    assert list(tmp_path.iterdir()) == []       # nothing written
    assert not PWNED.exists()                   # no code ran


@pytest.mark.parametrize("argv, phrase", ARG_CASES, ids=[" ".join(a) for a, _ in ARG_CASES])
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
    body = "".join(f"  - id: r{i}\n    applies_to: scan\n    condition: wind_mean_ms > {i % 20}\n"
                   f"    effect: warn\n    message: m\n" for i in range(10_000))
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
