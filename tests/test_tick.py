"""``advisor tick`` in-process: files, change tracking, dead feed, corrupted state, lock, notify.

The weather is synthetic (tests/conftest.py) and only puts the decision in a known state; the
checks here are about the state folder, not about physics.  Real-process behaviour (20
concurrent runs, SIGKILL mid-write, read-only and full folders) is in test_tick_processes.py.
"""

from __future__ import annotations

import fcntl
import json
import os
import sys
import time
from html.parser import HTMLParser
from pathlib import Path

import pandas as pd
import pytest

from advisor.commands.main import main
from advisor.decision import EXIT_CODES
from advisor.evaluation.advisory import TickState, track_change
from advisor.io.statedir import EXIT_BUSY, EXIT_STATE_DIR

from .conftest import NIGHT_UTC, weather_table

AT = "2026-01-16T04:00:00Z"  # NIGHT_UTC: a calm night four hours after sunset → scan at 86 GHz (2 h session)
ROOT = Path(__file__).resolve().parent.parent


def make_site(
    folder: Path, tick: str = "", name: str = "Larch Basin Observatory (test copy, invented)", **weather
) -> Path:
    """A site file with a synthetic canonical feed and a reference scan two hours before ``AT``."""
    weather_table(**weather).to_csv(folder / "feed.csv", index=False)
    ref_time = NIGHT_UTC - pd.Timedelta(hours=2)
    (folder / "refs.csv").write_text(f"time,air_temp_c,note\n{ref_time:%Y-%m-%dT%H:%M:%SZ},2.8,test\n")
    site = folder / "site.yaml"
    site.write_text(
        f"site:\n  name: {json.dumps(name)}\n  latitude_deg: 47.12\n  longitude_deg: -114.0\n"
        "  elevation_m: 1050\n  time_zone: America/Denver\n  dish_diameter_m: 90\n"
        "feed:\n  path: feed.csv\nreferences:\n  path: refs.csv\n"
        # a short session: the quick laser scan is worth more than holography's better surface
        "thresholds:\n  session_hours: 2\n"
        'calibrators:\n  - {name: "3C 84", ra: "03h19m48.16s", dec: "+41d30m42.1s"}\n'
        '  - {name: "0716+714", ra: "07h21m53.45s", dec: "+71d20m36.4s"}\n' + tick
    )
    return site


def tick_argv(site: Path, state: Path, *extra: str, at: str = AT) -> list[str]:
    return ["tick", "--site", str(site), "--state-dir", str(state), "--at", at, *extra]


def tick(capsys, site, state, *extra, at=AT):
    status = main(tick_argv(site, state, *extra, at=at))
    out, err = capsys.readouterr()
    return status, out, err


def history(state: Path, name: str = "history.jsonl") -> list[dict]:
    path = state / name
    return [json.loads(line) for line in path.read_text().splitlines()] if path.exists() else []


@pytest.fixture()
def site(tmp_path):
    return make_site(tmp_path)


@pytest.fixture()
def state(tmp_path):
    return tmp_path / "state"


class _Tags(HTMLParser):
    def __init__(self):
        super().__init__()
        self.tags, self.title, self._in_title = [], "", False

    def handle_starttag(self, tag, attrs):
        self.tags.append((tag, dict(attrs)))
        self._in_title = tag == "title"

    def handle_endtag(self, tag):
        self._in_title = False

    def handle_data(self, data):
        if self._in_title:
            self.title += data


def test_first_tick_writes_every_file_and_announces(capsys, site, state):
    status, out, err = tick(capsys, site, state)
    assert status == 0 and err == ""
    assert out.startswith("advisor tick: first advisory in this state dir: SCAN NOW\n")
    assert "VERDICT: SCAN NOW" in out
    doc = json.loads((state / "advisory.json").read_text())
    # the check --json object plus the tick's keys
    assert main(["check", "--site", str(site), "--at", AT, "--json"]) == 0
    check_doc = json.loads(capsys.readouterr().out)
    assert {k: doc[k] for k in check_doc} == check_doc
    assert doc["issued_utc"] == doc["changed_since"] and doc["issued_utc"].endswith("Z")
    assert doc["undetermined_ticks"] == 0 and doc["feed_looks_dead"] is False
    text = (state / "advisory.txt").read_text()
    assert text.startswith("Issued ") and "VERDICT: SCAN NOW" in text and "\x1b[" not in text
    page = _Tags()
    page.feed((state / "advisory.html").read_text())
    assert ("meta", {"http-equiv": "refresh", "content": "60"}) in page.tags
    assert page.title.startswith("SCAN NOW · Larch Basin")
    assert "SCAN NOW" in (state / "advisory.html").read_text()
    [line] = history(state)
    assert line["verdict"] == "scan" and line["change"] == "first" and line["issued_utc"] == doc["issued_utc"]
    st = json.loads((state / "state.json").read_text())
    assert st["verdict"] == "scan" and st["issued_utc"] == doc["issued_utc"]
    assert sorted(p.name for p in state.iterdir()) == [  # .history.jsonl.lock: the history writers' lock
        ".history.jsonl.lock",
        "advisory.html",
        "advisory.json",
        "advisory.txt",
        "history.jsonl",
        "lock",
        "state.json",
    ]


def test_unchanged_verdict_is_silent_and_keeps_changed_since(capsys, site, state):
    tick(capsys, site, state)
    first = json.loads((state / "advisory.json").read_text())
    later = (pd.Timestamp(AT) + pd.Timedelta(minutes=5)).strftime("%Y-%m-%dT%H:%M:%SZ")
    status, out, err = tick(capsys, site, state, at=later)
    assert (status, out, err) == (0, "", "")
    doc = json.loads((state / "advisory.json").read_text())
    # --at drives the advisory's clocks: issued is the evaluation time, since stays at the first run's
    assert doc["changed_since"] == first["changed_since"] == first["issued_utc"] == AT.replace("Z", ".000Z")
    assert doc["issued_utc"] == later.replace("Z", ".000Z")
    assert [h["change"] for h in history(state)] == ["first", None]


def test_verdict_change_is_announced_with_the_check_exit_code(capsys, site, state):
    tick(capsys, site, state)
    status, out, _ = tick(capsys, site, state, "--freq", "300")  # 1 mm: too fine for this surface
    doc = json.loads((state / "advisory.json").read_text())
    assert doc["verdict"] != "scan" and status == EXIT_CODES[doc["verdict"]]
    assert out.startswith("advisor tick: verdict changed: SCAN NOW → ")
    assert doc["changed_since"] == doc["issued_utc"] and doc["previous_verdict"] == "scan"
    status, out, _ = tick(capsys, site, state, "--freq", "300", "--always")
    assert out.startswith("advisor tick: no change: ") and "VERDICT:" in out


def test_json_output_on_change(capsys, site, state):
    status, out, _ = tick(capsys, site, state, "--json")
    doc = json.loads(out)
    assert doc["change"] == "first" and doc["verdict"] == "scan" and doc["exit_status"] == status


def test_reason_changes_announced_only_with_notify_on_reasons(capsys, tmp_path, state):
    rule = tmp_path / "gusty.yaml"
    rule.write_text(
        "rules:\n  - id: test_gusty\n    applies_to: scan\n    condition: wind_gust_ms > 2\n"
        "    effect: warn\n    message: gusts {wind_gust_ms:.1f} m/s\n"
    )
    site = make_site(tmp_path, wind_gust_ms=1.5)
    assert tick(capsys, site, state, "--rules", str(rule))[0] == 0
    make_site(tmp_path, wind_gust_ms=2.5)
    status, out, _ = tick(capsys, site, state, "--rules", str(rule))
    assert status == 0 and out == ""  # same verdict, reasons not watched
    make_site(tmp_path, wind_gust_ms=1.5)
    status, out, _ = tick(capsys, site, state, "--rules", str(rule), "--notify-on-reasons")
    assert out.startswith("advisor tick: reasons changed (SCAN NOW unchanged): - test_gusty[scan]")
    make_site(tmp_path, wind_gust_ms=2.5)
    status, out, _ = tick(capsys, site, state, "--rules", str(rule), "--notify-on-reasons")
    assert out.startswith("advisor tick: reasons changed (SCAN NOW unchanged): + test_gusty[scan]")


def test_dead_feed_is_announced_once_after_n_undetermined_ticks(capsys, tmp_path, state):
    site = make_site(tmp_path, tick="tick:\n  dead_feed_ticks: 3\n")
    late = "2026-01-16T06:00:00Z"  # two hours after the last sample: stale
    outs = [tick(capsys, site, state, at=late) for _ in range(4)]
    assert [o[0] for o in outs] == [12] * 4
    assert outs[0][1].startswith("advisor tick: first advisory in this state dir: UNDETERMINED")
    assert "stale" in outs[0][1]
    assert outs[1][1] == "" and outs[3][1] == ""
    assert outs[2][1].startswith("advisor tick: the feed looks dead: 3 consecutive undetermined ticks")
    doc = json.loads((state / "advisory.json").read_text())
    assert doc["feed_looks_dead"] is True and doc["undetermined_ticks"] == 4
    assert any("FEED LOOKS DEAD" in n for n in doc["notes"])
    assert "THE FEED LOOKS DEAD" in (state / "advisory.html").read_text()
    status, out, _ = tick(capsys, site, state)
    assert status == 0
    assert out.startswith("advisor tick: verdict changed: UNDETERMINED → SCAN NOW")
    assert "the feed is back after 4 undetermined ticks" in out.splitlines()[0]


def test_missing_feed_gives_an_undetermined_advisory_saying_why(capsys, site, state, tmp_path):
    status, out, err = tick(capsys, site, state, "--feed", str(tmp_path / "gone.csv"))
    assert status == 12 and err == ""
    doc = json.loads((state / "advisory.json").read_text())
    assert doc["verdict"] == "undetermined"
    assert doc["reasons"][0]["rule"] == "feed" and "not found" in doc["reasons"][0]["message"]
    assert doc["data_quality"]["ok"] is False and "gone.csv" in doc["data_quality"]["source"]
    assert "feed cannot be read" in out
    (tmp_path / "empty.csv").write_text("")
    status, out, _ = tick(capsys, site, state, "--feed", str(tmp_path / "empty.csv"), "--notify-on-reasons")
    assert status == 12 and "empty" in json.loads((state / "advisory.json").read_text())["reasons"][0]["message"]


@pytest.mark.parametrize(
    "garbage",
    [
        b'{"schema": 1, "verdict": "scan", "reasons": [], "since_u',  # truncated mid-write
        b"\x00\x00\x00\x00",  # zeroed blocks after a crash
        b'{"schema": 1, "verdict": "maybe", "reasons": [], "since_utc": "2026-01-01T00:00:00Z", '
        b'"issued_utc": "2026-01-01T00:00:00Z", "undetermined_ticks": 0}',  # parses, but invalid
        b"[1, 2, 3]",
    ],
)
def test_corrupted_state_is_set_aside_and_run_starts_clean(capsys, site, state, garbage):
    tick(capsys, site, state)
    (state / "state.json").write_bytes(garbage)
    status, out, err = tick(capsys, site, state)
    assert status == 0
    [aside] = list(state.glob("state.json.corrupt-*"))
    assert aside.read_bytes() == garbage
    assert "corrupted or truncated state file" in err and aside.name in err and "clean state" in err
    assert out.startswith("advisor tick: first advisory in this state dir")
    assert json.loads((state / "state.json").read_text())["verdict"] == "scan"
    assert tick(capsys, site, state)[1:] == ("", "")  # and the next run is quiet again


def test_overlapping_run_waits_then_gives_up_without_touching_state(capsys, site, state):
    tick(capsys, site, state)
    before = {p.name: p.read_bytes() for p in state.iterdir()}
    fd = os.open(state / "lock", os.O_RDONLY)
    try:
        fcntl.flock(fd, fcntl.LOCK_EX)
        t0 = time.monotonic()
        status, out, err = tick(capsys, site, state, "--lock-wait", "0.3")
        waited = time.monotonic() - t0
    finally:
        os.close(fd)
    assert status == EXIT_BUSY and out == ""
    assert err.startswith("advisor: busy: ") and "another advisor tick" in err and err.count("\n") == 1
    assert 0.3 <= waited < 3
    assert {p.name: p.read_bytes() for p in state.iterdir()} == before


def test_state_dir_that_cannot_be_created_is_a_clear_error(capsys, site, tmp_path):
    blocker = tmp_path / "plainfile"
    blocker.write_text("not a folder")
    status, out, err = tick(capsys, site, blocker / "state")
    assert status == EXIT_STATE_DIR and out == ""
    assert err.startswith("advisor: error: ") and "cannot create the state dir" in err and err.count("\n") == 1


def _notify_script(tmp_path: Path) -> Path:
    script = tmp_path / "record.py"
    script.write_text(
        "import json, os, sys\n"
        "rec = {'argv': sys.argv[1:], 'stdin': sys.stdin.read(),\n"
        "       'env': {k: v for k, v in os.environ.items() if k.startswith('ADVISOR_')}}\n"
        "with open(os.path.join(os.path.dirname(sys.argv[0]), 'calls.jsonl'), 'a') as fh:\n"
        "    fh.write(json.dumps(rec) + '\\n')\n"
    )
    return script


def test_notify_command_runs_on_change_with_argv_and_advisory_on_stdin(capsys, tmp_path, state):
    script = _notify_script(tmp_path)
    nasty = "$(touch pwned); `touch pwned2` && rm -rf / #"
    site = make_site(
        tmp_path,
        tick="tick:\n  notify_command: ["
        + ", ".join(json.dumps(a) for a in (sys.executable, str(script), nasty, "two words"))
        + "]\n",
    )
    tick(capsys, site, state)
    tick(capsys, site, state)  # unchanged: no notification
    tick(capsys, site, state, "--freq", "300")  # changed
    calls = [json.loads(x) for x in (tmp_path / "calls.jsonl").read_text().splitlines()]
    assert len(calls) == 2
    assert all(c["argv"] == [nasty, "two words"] for c in calls)  # passed literally, no shell
    assert not (tmp_path / "pwned").exists() and not (tmp_path / "pwned2").exists()
    assert calls[0]["stdin"].startswith("advisor tick: first advisory") and "VERDICT: SCAN NOW" in calls[0]["stdin"]
    assert calls[0]["env"]["ADVISOR_CHANGE"] == "first" and calls[0]["env"]["ADVISOR_VERDICT"] == "scan"
    assert calls[1]["env"]["ADVISOR_PREVIOUS_VERDICT"] == "scan" and calls[1]["env"]["ADVISOR_CHANGE"] == "verdict"


def test_notify_json_format(capsys, tmp_path, state):
    script = _notify_script(tmp_path)
    site = make_site(
        tmp_path,
        tick=f"tick:\n  notify_format: json\n  notify_command: [{json.dumps(sys.executable)}, "
        f"{json.dumps(str(script))}]\n",
    )
    tick(capsys, site, state)
    [call] = [json.loads(x) for x in (tmp_path / "calls.jsonl").read_text().splitlines()]
    doc = json.loads(call["stdin"])
    assert doc["verdict"] == "scan" and doc["change"] == "first" and "issued_utc" in doc


def test_hung_notify_command_is_killed_at_its_timeout(capsys, tmp_path, state):
    pidfile = tmp_path / "child.pid"
    code = f"import os, time; open({str(pidfile)!r}, 'w').write(str(os.getpid())); time.sleep(60)"
    site = make_site(
        tmp_path,
        tick=f"tick:\n  notify_timeout_s: 0.5\n  notify_command: [{json.dumps(sys.executable)}, "
        f"'-c', {json.dumps(code)}]\n",
    )
    t0 = time.monotonic()
    status, out, err = tick(capsys, site, state)
    assert time.monotonic() - t0 < 8
    assert status == 0 and "timed out after 0.5 s and was killed" in err
    pid = int(pidfile.read_text())
    assert not Path(f"/proc/{pid}").exists() or "zombie" in Path(f"/proc/{pid}/status").read_text()


def test_failing_notify_command_is_a_warning_not_a_failure(capsys, tmp_path, state):
    site = make_site(
        tmp_path, tick=f"tick:\n  notify_command: [{json.dumps(sys.executable)}, '-c', 'raise SystemExit(3)']\n"
    )
    status, out, err = tick(capsys, site, state)
    assert status == 0 and "exited with status 3" in err and (state / "advisory.json").exists()
    site = make_site(tmp_path, tick="tick:\n  notify_command: [/nonexistent/notify-ops]\n")
    status, out, err = tick(capsys, site, state, "--freq", "300")
    assert "could not start" in err


def test_history_rotates_at_the_configured_size(capsys, tmp_path, state):
    site = make_site(tmp_path, tick="tick:\n  history_max_bytes: 1000\n")
    for _ in range(8):
        tick(capsys, site, state)
    current, rotated = history(state), history(state, "history.jsonl.1")
    assert rotated and current
    assert (state / "history.jsonl").stat().st_size <= 1000
    assert (state / "history.jsonl.1").stat().st_size <= 1000
    written = [h["written_utc"] for h in rotated + current]  # the machine's clock (issued is --at's)
    assert written == sorted(written) and len(set(written)) == len(written)


def test_partial_history_line_from_a_crash_is_cut_and_reported(capsys, site, state):
    tick(capsys, site, state)
    with open(state / "history.jsonl", "ab") as fh:
        fh.write(b'{"issued_utc":"2026-01-1')
    status, out, err = tick(capsys, site, state)
    assert "removed a partial last line" in err
    assert [h["change"] for h in history(state)] == ["first", None]


def test_leftover_temp_files_are_removed_by_the_next_run(capsys, site, state):
    tick(capsys, site, state)
    (state / ".advisory.json.abc123.tmp").write_text('{"half')
    status, out, err = tick(capsys, site, state)
    assert "removed 1 temp file(s) left by an interrupted run" in err
    assert not list(state.glob(".*.tmp"))


def test_site_name_is_escaped_in_the_html_page(capsys, tmp_path, state):
    site = make_site(tmp_path, name="Larch <b>Basin</b> {test} & co (invented)")
    assert tick(capsys, site, state)[0] == 0
    page = (state / "advisory.html").read_text()
    assert "<b>Basin</b>" not in page and "Larch &lt;b&gt;Basin&lt;/b&gt; {test} &amp; co" in page


@pytest.mark.parametrize(
    "section, expected",
    [
        ("tick:\n  notify_command: mail -s advice ops\n", "tick.notify_command: expected a list"),
        ("tick:\n  dead_feed_ticks: 2.5\n", "tick.dead_feed_ticks: expected a whole number"),
        ("tick:\n  history_max_bytes: 10\n", "tick.history_max_bytes: 10 is outside"),
        ("tick:\n  notify_timeout: 5\n", "did you mean 'notify_timeout_s'"),
        ("tick:\n  notify_format: xml\n", "unknown format"),
    ],
)
def test_bad_tick_section_is_a_one_line_site_error(capsys, tmp_path, state, section, expected):
    site = make_site(tmp_path, tick=section)
    status, out, err = tick(capsys, site, state)
    assert status == 2 and err.startswith("advisor: error: ") and expected in err and err.count("\n") == 1
    doc = json.loads((state / "advisory.json").read_text())  # never an old call left standing
    assert doc["verdict"] == "undetermined" and expected in doc["reasons"][0]["message"]


def test_relative_notify_program_is_resolved_against_the_site_folder(tmp_path):
    from advisor.io.site import load_site

    site = make_site(tmp_path, tick="tick:\n  notify_command: [./notify.sh, --to, ops]\n")
    assert load_site(site).tick.notify_command == (str(tmp_path / "notify.sh"), "--to", "ops")
    site = make_site(tmp_path, tick="tick:\n  notify_command: [logger, -t, advisor]\n")
    assert load_site(site).tick.notify_command == ("logger", "-t", "advisor")


def _state(verdict, reasons=(), ticks=0):
    return TickState(verdict, tuple(reasons), "2026-01-01T00:00:00.000Z", "2026-01-01T00:05:00.000Z", ticks)


def test_track_change_rules():
    now = "2026-01-01T00:10:00.000Z"
    assert track_change(None, "scan", (), now, 6, False).kind == "first"
    same = track_change(_state("scan", ["a[scan]"]), "scan", ("b[scan]",), now, 6, False)
    assert same.kind is None and same.state.since_utc == "2026-01-01T00:00:00.000Z"
    assert track_change(_state("scan", ["a[scan]"]), "scan", ("b[scan]",), now, 6, True).kind == "reasons"
    moved = track_change(_state("scan"), "postpone", (), now, 6, False)
    assert moved.kind == "verdict" and moved.state.since_utc == now
    assert track_change(_state("undetermined", ticks=4), "undetermined", (), now, 6, False).kind is None
    dead = track_change(_state("undetermined", ticks=5), "undetermined", (), now, 6, False)
    assert dead.kind == "dead_feed" and dead.feed_looks_dead and dead.state.undetermined_ticks == 6
    later = track_change(dead.state, "undetermined", (), now, 6, False)
    assert later.kind is None and later.feed_looks_dead
    first_dead = track_change(None, "undetermined", (), now, 1, False)
    assert first_dead.kind == "first" and "feed looks dead" in first_dead.headline


def test_notify_output_goes_to_its_own_log_not_into_cron_mail(capfd, tmp_path, state):
    code = "import sys; sys.stdin.read(); print('NOTIFY-OUT'); print('NOTIFY-ERR', file=sys.stderr)"
    site = make_site(
        tmp_path, tick=f"tick:\n  notify_command: [{json.dumps(sys.executable)}, '-c', {json.dumps(code)}]\n"
    )
    assert main(tick_argv(site, state)) == 0
    out, err = capfd.readouterr()  # what cron would mail: the advisory once, nothing of notify's
    assert "NOTIFY" not in out + err and out.count("VERDICT: SCAN NOW") == 2  # verdict first and last line
    log = (state / "notify.log").read_text()
    assert log.startswith("--- 2026-01-16T04:00:00.000Z ") and "NOTIFY-OUT" in log and "NOTIFY-ERR" in log


def test_at_drives_the_advisory_clocks(capsys, tmp_path, state):
    site = make_site(tmp_path)
    tick(capsys, site, state, at="2026-01-16T03:00:00Z")
    tick(capsys, site, state, "--freq", "300", at="2026-01-16T03:30:00Z")  # the verdict changes here
    tick(capsys, site, state, "--freq", "300", at="2026-01-16T04:00:00Z")
    doc = json.loads((state / "advisory.json").read_text())
    assert doc["issued_utc"] == "2026-01-16T04:00:00.000Z" and doc["changed_since"] == "2026-01-16T03:30:00.000Z"
    text = (state / "advisory.txt").read_text()
    assert text.startswith("Issued 2026-01-16 04:00:00 UTC") and "since 2026-01-16 03:30:00 UTC" in text
