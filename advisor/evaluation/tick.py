"""The state folder of ``advisor tick``: lock, change tracking, crash-safe files, history, notify.

One tick, under an exclusive ``flock`` on ``DIR/lock`` (a second run waits ``lock_wait_s``,
then gives up with :class:`Busy`, exit 75)::

    read DIR/state.json          last verdict, reason set, since when, consecutive undetermined ticks
                                 (unreadable → renamed state.json.corrupt-<UTC>, reported, clean start)
    track_change(...)            pure: what changed, the new state, the notification headline
    stage                        advisory.json / .txt / .html and state.json → temp files, fsync
    append history.jsonl         one line, fsync (rotated to history.jsonl.1 above the site's size;
                                 a failed append is truncated back)
    rename                       temps over advisory.json, .txt, .html, then state.json; fsync DIR

Nothing is renamed into place until every file was written and the history line appended, so
a full or read-only folder changes nothing (:class:`StateDirError`, exit 74) and a killed run
leaves the previous advisory whole (its temp files are removed by the next run).  The state
file is renamed last, so a run killed between the renames is announced again next time
(at least once, never lost).  The one window with a visible trace is a crash between the
history append and the renames, microseconds long: a history line for an advisory that was
not published.

Test hook: with ``ADVISOR_TICK_TEST_PAUSE_S`` set, the run reports on stderr and sleeps that
long between staging and renaming, so tests can kill it there.
"""

from __future__ import annotations

import errno
import fcntl
import html
import io
import json
import os
import signal
import subprocess
import sys
import tempfile
import time
from contextlib import contextmanager
from dataclasses import dataclass, replace
from datetime import datetime, timezone
from pathlib import Path
from typing import Iterator

from advisor.decision import VERDICTS
from advisor.errors import AdvisorError
from advisor.views.render import VERDICT_STYLE

#: Exit status when another tick holds the lock (sysexits.h EX_TEMPFAIL: try again later).
EXIT_BUSY = 75
#: Exit status when the state folder cannot be written (sysexits.h EX_IOERR).
EXIT_STATE_DIR = 74
STATE_SCHEMA = 1
FILES = ("advisory.json", "advisory.txt", "advisory.html", "state.json")
HTML_REFRESH_S = 60
HTML_WIDTH_COLUMNS = 100
TEST_PAUSE_ENV = "ADVISOR_TICK_TEST_PAUSE_S"


class StateDirError(AdvisorError):
    """The state folder cannot be created, locked or written."""


class Busy(AdvisorError):
    """Another tick holds the state folder's lock."""


def utc_text(moment: datetime) -> str:
    """``2026-12-01T03:00:00.123Z`` (UTC, milliseconds)."""
    return moment.astimezone(timezone.utc).strftime("%Y-%m-%dT%H:%M:%S.%f")[:-3] + "Z"


def short_utc(text: str | None) -> str:
    """``2026-12-01T03:00:00.123Z`` → ``2026-12-01 03:00:00 UTC``."""
    return "?" if not text else f"{text[:10]} {text[11:19]} UTC"


def _label(verdict: str) -> str:
    return VERDICT_STYLE[verdict][0]


def _io_error(path: Path, action: str, exc: OSError, hint: str) -> StateDirError:
    reason = exc.strerror or str(exc)
    return StateDirError(f"cannot {action}: {reason}", source=str(path), hint=hint)


WRITE_HINT = "free space or fix permissions in the state dir, or point --state-dir elsewhere; the previous advisory is unchanged"


# --- lock ---------------------------------------------------------------------------------

@contextmanager
def locked(state_dir: Path, wait_s: float) -> Iterator[None]:
    """Hold ``flock(DIR/lock)``; wait up to ``wait_s`` seconds for it, else raise :class:`Busy`."""
    if not state_dir.is_dir():
        try:
            state_dir.mkdir(mode=0o755)
        except FileExistsError:
            if not state_dir.is_dir():
                raise StateDirError("exists and is not a folder", source=str(state_dir),
                                    hint="point --state-dir at a folder") from None
        except OSError as exc:
            raise _io_error(state_dir, "create the state dir", exc,
                            "create its parent folder first, or point --state-dir elsewhere") from None
    path = state_dir / "lock"
    try:
        fd = os.open(path, os.O_RDONLY | os.O_CREAT | os.O_CLOEXEC, 0o644)
    except OSError as exc:
        raise _io_error(path, "create the lock file", exc, WRITE_HINT) from None
    try:
        deadline = time.monotonic() + max(0.0, wait_s)
        while True:
            try:
                fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
                break
            except BlockingIOError:
                if time.monotonic() >= deadline:
                    raise Busy(f"another advisor tick has held the lock for {wait_s:g} s; this run changed nothing",
                               source=str(path),
                               hint=f"exit {EXIT_BUSY}; if this repeats, look for a hung tick or slow disk") from None
                time.sleep(0.05)
        yield
    finally:
        os.close(fd)  # releases the lock


def remove_leftover_temps(state_dir: Path) -> list[str]:
    """Delete temp files a killed run left behind (only call while holding the lock)."""
    removed = []
    for name in FILES:
        for leftover in state_dir.glob(f".{name}.*.tmp"):
            try:
                leftover.unlink()
                removed.append(leftover.name)
            except OSError:
                pass
    return removed


# --- state --------------------------------------------------------------------------------

@dataclass(frozen=True)
class TickState:
    """What the previous tick left: its verdict, reason set and counters."""

    verdict: str
    reasons: tuple[str, ...]
    since_utc: str
    issued_utc: str
    undetermined_ticks: int

    def as_dict(self) -> dict:
        return {"schema": STATE_SCHEMA, "verdict": self.verdict, "reasons": list(self.reasons),
                "since_utc": self.since_utc, "issued_utc": self.issued_utc,
                "undetermined_ticks": self.undetermined_ticks}


def _parse_state(text: str) -> TickState:
    doc = json.loads(text)
    if not isinstance(doc, dict) or doc.get("schema") != STATE_SCHEMA:
        raise ValueError("not a tick state object of schema 1")
    verdict, reasons, ticks = doc.get("verdict"), doc.get("reasons"), doc.get("undetermined_ticks")
    if verdict not in VERDICTS:
        raise ValueError(f"unknown verdict {verdict!r}")
    if not isinstance(reasons, list) or not all(isinstance(r, str) for r in reasons):
        raise ValueError("reasons is not a list of strings")
    if isinstance(ticks, bool) or not isinstance(ticks, int) or ticks < 0:
        raise ValueError("undetermined_ticks is not a count")
    for key in ("since_utc", "issued_utc"):
        value = doc.get(key)
        if not isinstance(value, str) or not value.endswith("Z"):
            raise ValueError(f"{key} is not a UTC time")
        datetime.fromisoformat(value[:-1])
    return TickState(verdict, tuple(reasons), doc["since_utc"], doc["issued_utc"], ticks)


def read_state(state_dir: Path, now: datetime) -> tuple[TickState | None, str | None]:
    """The previous tick's state, or None; a corrupted file is renamed aside and reported.

    Returns ``(state, warning)``.
    """
    path = state_dir / "state.json"
    try:
        raw = path.read_bytes()
    except FileNotFoundError:
        return None, None
    except OSError as exc:
        raise _io_error(path, "read the state file", exc, "check the state dir's permissions") from None
    try:
        return _parse_state(raw.decode("utf-8")), None
    except (ValueError, UnicodeDecodeError) as exc:
        problem = str(exc).splitlines()[0][:120] or type(exc).__name__
    aside = path.with_name(f"state.json.corrupt-{now.astimezone(timezone.utc):%Y%m%dT%H%M%S}Z")
    if aside.exists():
        aside = aside.with_name(f"{aside.name}-{os.getpid()}")
    try:
        os.replace(path, aside)
    except OSError as exc:
        raise _io_error(path, "set the corrupted state file aside", exc, WRITE_HINT) from None
    return None, (f"{path}: corrupted or truncated state file ({problem}); set aside as {aside.name}; "
                  "starting from a clean state")


# --- change tracking (pure) ---------------------------------------------------------------

@dataclass(frozen=True)
class Change:
    """What this tick found compared with the last: ``kind`` is None when nothing to announce."""

    kind: str | None            # first | verdict | reasons | dead_feed | None
    headline: str
    state: TickState
    previous_verdict: str | None
    feed_looks_dead: bool


def reason_set(reasons) -> tuple[str, ...]:
    """The reasons that carry a judgement (block, warn, error term) as sorted ``rule[applies_to]``."""
    return tuple(sorted({f"{r.rule}[{r.applies_to}]" for r in reasons if r.effect != "info"}))


def track_change(previous: TickState | None, verdict: str, reasons: tuple[str, ...], issued_utc: str,
                 dead_feed_ticks: int, notify_on_reasons: bool) -> Change:
    """Compare this tick with the previous state; the new state and what to announce."""
    label = _label(verdict)
    undetermined = (previous.undetermined_ticks if previous else 0) + 1 if verdict == "undetermined" else 0
    dead = verdict == "undetermined" and undetermined >= dead_feed_ticks
    if previous is None:
        since, kind = issued_utc, "first"
        headline = f"advisor tick: first advisory in this state dir: {label}"
    elif previous.verdict != verdict:
        since, kind = issued_utc, "verdict"
        headline = (f"advisor tick: verdict changed: {_label(previous.verdict)} → {label} "
                    f"({previous.verdict} since {short_utc(previous.since_utc)})")
        if previous.verdict == "undetermined" and previous.undetermined_ticks >= dead_feed_ticks:
            headline += f"; the feed is back after {previous.undetermined_ticks} undetermined ticks"
    else:
        since = previous.since_utc
        added = sorted(set(reasons) - set(previous.reasons))
        dropped = sorted(set(previous.reasons) - set(reasons))
        if dead and undetermined == dead_feed_ticks:
            kind = "dead_feed"
            headline = (f"advisor tick: the feed looks dead: {undetermined} consecutive undetermined ticks "
                        f"since {short_utc(since)}")
        elif notify_on_reasons and (added or dropped):
            kind = "reasons"
            bits = [f"+ {r}" for r in added] + [f"- {r}" for r in dropped]
            headline = f"advisor tick: reasons changed ({label} unchanged): " + "; ".join(bits)
        else:
            kind, headline = None, ""
    if dead and kind in ("first", "verdict"):
        headline += f"; the feed looks dead ({undetermined} consecutive undetermined ticks)"
    state = TickState(verdict, reasons, since, issued_utc, undetermined)
    return Change(kind, headline, state, previous.verdict if previous else None, dead)


def dead_feed_note(change: Change) -> str | None:
    """A line for the advisory itself while the feed looks dead."""
    if not change.feed_looks_dead:
        return None
    return (f"THE FEED LOOKS DEAD: {change.state.undetermined_ticks} consecutive undetermined ticks since "
            f"{short_utc(change.state.since_utc)}. Check the weather logger and its link.")


# --- rendering of the three advisory files ------------------------------------------------

def advisory_json(check_doc: dict, change: Change) -> dict:
    """The ``check --json`` object plus the tick's own keys."""
    doc = dict(check_doc)
    doc.update({"issued_utc": change.state.issued_utc, "changed_since": change.state.since_utc,
                "previous_verdict": change.previous_verdict,
                "undetermined_ticks": change.state.undetermined_ticks,
                "feed_looks_dead": change.feed_looks_dead})
    return doc


def issued_line(change: Change) -> str:
    return (f"Issued {short_utc(change.state.issued_utc)} by advisor tick; "
            f"{change.state.verdict} since {short_utc(change.state.since_utc)}.")


_HTML_PAGE = """<!DOCTYPE html>
<html lang="en">
<head>
<meta charset="UTF-8">
<meta http-equiv="refresh" content="{refresh}">
<meta name="viewport" content="width=device-width, initial-scale=1">
<title>{title}</title>
<style>
{{stylesheet}}
body {{{{
    color: {{foreground}};
    background-color: {{background}};
    margin: 1.2em;
}}}}
pre {{{{ font-size: clamp(10px, min(1.5vw, 1.9vh), 28px); line-height: 1.2; margin: 0; }}}}
#stale {{{{ display: none; font: bold 1.6em sans-serif; color: #fff; background: #b00020;
          padding: 0.5em 0.8em; margin-bottom: 0.6em; }}}}
.issued {{{{ font: 0.95em sans-serif; opacity: 0.75; margin-top: 0.6em; }}}}
</style>
</head>
<body>
<div id="stale" data-issued="{issued}" data-stale-min="{stale_min}"></div>
<pre style="font-family:'DejaVu Sans Mono',Menlo,consolas,'Courier New',monospace"><code style="font-family:inherit">{{code}}</code></pre>
<p class="issued">{issued_text} This page reloads every {refresh} s and turns red when the advisory is
older than {stale_min} min.</p>
<noscript><p class="issued">Scripts are off: check the issued time yourself.</p></noscript>
<script>
(function () {{{{
  var box = document.getElementById("stale");
  function check() {{{{
    var age_min = (Date.now() - Date.parse(box.dataset.issued)) / 60000;
    if (age_min > Number(box.dataset.staleMin)) {{{{
      box.textContent = "STALE: this advisory is " + Math.round(age_min) +
        " min old. The tick job may have stopped; do not act on it.";
      box.style.display = "block";
    }}}}
  }}}}
  check();
  setInterval(check, 15000);
}}}})();
</script>
</body>
</html>
"""


def advisory_html(panel, change: Change, title: str, stale_after_min: float) -> str:
    """The rich panel exported as a self-contained page with a meta refresh and a stale banner."""
    from rich.console import Console
    from rich.terminal_theme import MONOKAI
    from rich.text import Text

    def esc(text: str) -> str:  # HTML-escaped and safe inside a str.format template
        return html.escape(text).replace("{", "{{").replace("}", "}}")

    template = _HTML_PAGE.format(refresh=HTML_REFRESH_S, title=esc(title), issued=esc(change.state.issued_utc),
                                 stale_min=f"{stale_after_min:g}", issued_text=esc(issued_line(change)))
    console = Console(record=True, width=HTML_WIDTH_COLUMNS, file=io.StringIO(), force_terminal=True,
                      color_system="truecolor", no_color=False, legacy_windows=False)
    note = dead_feed_note(change)
    if note:
        console.print(Text(f" {note} ", style="bold white on red"))
    console.print(panel)
    return console.export_html(theme=MONOKAI, code_format=template, inline_styles=True)


# --- writing ------------------------------------------------------------------------------

class Staged:
    """Temp files written and fsynced in the state dir, renamed into place only by :meth:`commit`."""

    def __init__(self, state_dir: Path) -> None:
        self.state_dir = state_dir
        self.pending: list[tuple[str, Path]] = []

    def write(self, name: str, text: str) -> None:
        final = self.state_dir / name
        try:
            fd, tmp = tempfile.mkstemp(prefix=f".{name}.", suffix=".tmp", dir=self.state_dir)
        except OSError as exc:
            raise _io_error(final, "write", exc, WRITE_HINT) from None
        self.pending.append((tmp, final))
        try:
            with os.fdopen(fd, "wb") as fh:
                fh.write(text.encode("utf-8"))
                fh.flush()
                os.fsync(fh.fileno())
            os.chmod(tmp, 0o644)
        except OSError as exc:
            raise _io_error(final, "write", exc, WRITE_HINT) from None

    def discard(self) -> None:
        for tmp, _ in self.pending:
            try:
                os.unlink(tmp)
            except OSError:
                pass
        self.pending = []

    def commit(self) -> None:
        """Rename every temp over its final name, in staging order, then fsync the folder."""
        for tmp, final in self.pending:
            try:
                os.replace(tmp, final)
            except OSError as exc:
                self.discard()
                raise _io_error(final, "rename into place", exc, WRITE_HINT) from None
        self.pending = []
        fsync_dir(self.state_dir)


def fsync_dir(folder: Path) -> None:
    try:
        fd = os.open(folder, os.O_RDONLY | os.O_DIRECTORY)
    except OSError:
        return
    try:
        os.fsync(fd)
    except OSError:
        pass
    finally:
        os.close(fd)


def append_history(path: Path, record: dict, max_bytes: int) -> list[str]:
    """Append one JSON line with fsync; rotate to ``<name>.1`` first when it would pass ``max_bytes``.

    A failed append is truncated back to the old size, so the file never keeps a partial line.
    Returns warnings (a partial last line found from an earlier crash is cut off and reported).
    """
    line = (json.dumps(record, separators=(",", ":"), allow_nan=False) + "\n").encode("utf-8")
    warnings = []
    try:
        size = path.stat().st_size
    except FileNotFoundError:
        size = 0
    except OSError as exc:
        raise _io_error(path, "read the history", exc, WRITE_HINT) from None
    try:
        if size and size + len(line) > max_bytes:
            os.replace(path, path.with_name(path.name + ".1"))
            fsync_dir(path.parent)
        fd = os.open(path, os.O_RDWR | os.O_APPEND | os.O_CREAT | os.O_CLOEXEC, 0o644)
    except OSError as exc:
        raise _io_error(path, "open the history for appending", exc, WRITE_HINT) from None
    try:
        size = os.fstat(fd).st_size
        if size:
            tail = os.pread(fd, min(size, 65536), max(0, size - 65536))
            if not tail.endswith(b"\n"):
                cut = tail.rfind(b"\n")
                keep = 0 if cut < 0 else size - len(tail) + cut + 1
                os.ftruncate(fd, keep)
                warnings.append(f"{path}: removed a partial last line ({size - keep} bytes) left by an "
                                "interrupted run")
                size = keep
        try:
            written = os.write(fd, line)
            if written != len(line):
                raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC))
            os.fsync(fd)
        except OSError:
            try:
                os.ftruncate(fd, size)
            except OSError:
                pass
            raise
    except OSError as exc:
        raise _io_error(path, "append to the history", exc, WRITE_HINT) from None
    finally:
        os.close(fd)
    return warnings


def _test_pause() -> None:
    value = os.environ.get(TEST_PAUSE_ENV)
    if not value:
        return
    print(f"advisor: test hook: {TEST_PAUSE_ENV}={value}: staged, pausing before rename", file=sys.stderr, flush=True)
    time.sleep(float(value))


def publish(state_dir: Path, files: dict[str, str], history_record: dict, history_max_bytes: int) -> list[str]:
    """Stage ``files`` (name → text; state.json last), append history, rename all; all or nothing."""
    staged = Staged(state_dir)
    try:
        for name in FILES:
            staged.write(name, files[name])
        _test_pause()
        warnings = append_history(state_dir / "history.jsonl", history_record, history_max_bytes)
    except BaseException:
        staged.discard()
        raise
    staged.commit()
    return warnings


# --- notify -------------------------------------------------------------------------------

def run_notify(argv: tuple[str, ...], payload: str, timeout_s: float, extra_env: dict[str, str]) -> str | None:
    """Run the site's notify command (argv, no shell) with ``payload`` on stdin; a warning or None.

    Its output goes to our stderr.  After ``timeout_s`` its whole process group is killed.
    """
    env = dict(os.environ)
    env.update(extra_env)
    try:
        out = sys.stderr.fileno()
    except (AttributeError, ValueError, OSError):  # stderr replaced by an in-memory stream
        out = None
    try:
        proc = subprocess.Popen(list(argv), stdin=subprocess.PIPE, stdout=out if out is not None else 2,
                                stderr=out, env=env, start_new_session=True, close_fds=True)
    except OSError as exc:
        return f"notify command {argv[0]!r} could not start: {exc.strerror or exc}"
    try:
        proc.communicate(payload.encode("utf-8"), timeout=timeout_s)
    except subprocess.TimeoutExpired:
        for sig in (signal.SIGTERM, signal.SIGKILL):
            try:
                os.killpg(proc.pid, sig)
            except ProcessLookupError:
                break
            try:
                proc.wait(timeout=2.0)
                break
            except subprocess.TimeoutExpired:
                continue
        proc.wait()
        return f"notify command {argv[0]!r} timed out after {timeout_s:g} s and was killed"
    except BrokenPipeError:
        proc.wait()
    if proc.returncode != 0:
        return f"notify command {argv[0]!r} exited with status {proc.returncode}"
    return None


def with_note(ctx, note: str | None):
    """``ctx`` with one more note line (the render Context is frozen)."""
    return ctx if not note else replace(ctx, notes=tuple(ctx.notes) + (note,))


def now_utc() -> datetime:
    return datetime.now(timezone.utc)
