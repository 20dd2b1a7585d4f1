"""The bounded reader, locked writers and output guards of advisor.io.fileio.

Every file the advisor reads goes through one reader: regular files only (FIFOs, devices and
directories refused without blocking), size-capped before reading, UTF-8 with or without a
byte-order mark, UTF-16 named as such.  Writers of shared files take a lock.  No check here is
timed; a FIFO that made the reader block would hang the test, so those tests carry an alarm
that turns a hang into a failure.
"""

from __future__ import annotations

import codecs
import multiprocessing
import os
import signal
from contextlib import contextmanager
from pathlib import Path

import pytest

from advisor.commands.main import main
from advisor.errors import AdvisorError, FeedError, RegistryError, RulesError, SiteError, UsageError
from advisor.io import fileio
from advisor.io.appendfile import append_line_locked
from advisor.io.fileio import (
    KINDS,
    FileKind,
    check_path,
    decode_text,
    locked,
    open_regular,
    read_bytes_bounded,
    refuse_overwrite,
    update_text_locked,
)
from advisor.io.references import read_registry

CORPUS = Path(__file__).resolve().parent / "bad_inputs"
GOOD_FEED = CORPUS / "feed_good.csv"
AT = "2026-01-16T04:00:00Z"


@contextmanager
def no_hang(seconds: int = 60):
    """Fail (instead of hanging the suite) if the block blocks; not a speed check."""

    def expired(*_):
        raise AssertionError(f"blocked for {seconds} s: the reader waited on a pipe or device")

    old = signal.signal(signal.SIGALRM, expired)
    signal.alarm(seconds)
    try:
        yield
    finally:
        signal.alarm(0)
        signal.signal(signal.SIGALRM, old)


# --- paths and special files -------------------------------------------------------------


def test_paths_that_cannot_name_a_file_are_one_clear_error():
    with pytest.raises(FeedError, match="NUL character"):
        check_path("feed\0.csv", FeedError, "feed file")
    with pytest.raises(FeedError, match="above the system's limit of 4,095"):
        check_path("/x" * 3000, FeedError, "feed file")
    with pytest.raises(FeedError, match="a name in the feed file path is 300 bytes long"):
        check_path("/tmp/" + "n" * 300, FeedError, "feed file")
    with pytest.raises(FeedError, match="empty path"):
        check_path("", FeedError, "feed file")
    assert check_path("a/b.csv", FeedError) == Path("a/b.csv")


def test_a_fifo_is_refused_without_waiting_for_a_writer(tmp_path):
    fifo = tmp_path / "feed.csv"
    os.mkfifo(fifo)
    with no_hang(), pytest.raises(FeedError, match=r"is a named pipe \(FIFO\), not a regular file"):
        read_bytes_bounded(fifo, FeedError, "feed")


def test_devices_and_directories_are_refused(tmp_path):
    with no_hang(), pytest.raises(RulesError, match="is a character device, not a regular file; expected a rule file"):
        read_bytes_bounded("/dev/zero", RulesError, "rules")
    with pytest.raises(SiteError, match="is a directory, expected a site file"):
        read_bytes_bounded(tmp_path, SiteError, "site")


def test_a_file_swapped_for_a_fifo_after_the_check_is_refused_on_the_open_descriptor(tmp_path, monkeypatch):
    fifo = tmp_path / "rules.yaml"
    os.mkfifo(fifo)
    monkeypatch.setattr(fileio, "stat_regular", lambda *a, **k: None)  # the race: the first check passed
    with no_hang(), pytest.raises(RulesError, match="named pipe"), open_regular(fifo, RulesError, "rules"):
        pass


def test_size_caps_are_checked_before_reading_and_name_the_fix(tmp_path):
    big = tmp_path / "registry.csv"
    with big.open("wb") as fh:  # sparse: 30 MB that occupy no disk and are never read
        fh.truncate(30_000_000)
    with pytest.raises(RegistryError) as info:
        read_bytes_bounded(big, RegistryError, "registry")
    line = info.value.one_line()
    assert "reference registry is 30 MB, above the 20 MB limit for a reference registry" in line
    assert "is this the right file?" in line
    small = FileKind("test file", 10, "keep it short")
    (tmp_path / "eleven").write_bytes(b"x" * 11)
    with pytest.raises(AdvisorError, match="11 bytes, above the 10-byte limit"):
        read_bytes_bounded(tmp_path / "eleven", AdvisorError, small)


def test_every_kind_has_a_cap_and_a_fix():
    assert {"feed", "site", "rules", "registry", "history", "model", "state"} <= set(KINDS)
    assert all(k.max_bytes > 0 and k.too_big_hint for k in KINDS.values())


def test_missing_and_empty_files(tmp_path):
    assert read_bytes_bounded(tmp_path / "none.csv", RegistryError, "registry", missing_ok=True) is None
    with pytest.raises(RegistryError, match="reference registry not found"):
        read_bytes_bounded(tmp_path / "none.csv", RegistryError, "registry")
    (tmp_path / "empty.yaml").write_text("")
    with pytest.raises(RulesError, match="rule file is empty"):
        read_bytes_bounded(tmp_path / "empty.yaml", RulesError, "rules")
    assert read_bytes_bounded(tmp_path / "empty.yaml", RulesError, "rules", empty_ok=True) == b""


# --- encodings ---------------------------------------------------------------------------

TEXT = "time,air_temp_c,note\n2026-01-15T09:00:00Z,2.0,after the holography\n"


def test_a_utf8_byte_order_mark_is_accepted():
    assert decode_text(codecs.BOM_UTF8 + TEXT.encode(), RegistryError, "registry", "r.csv") == TEXT


@pytest.mark.parametrize("encoding", ["utf-16", "utf-16-le", "utf-16-be", "utf-32"])
def test_utf16_and_utf32_are_named_not_called_binary(encoding):
    with pytest.raises(RegistryError) as info:
        decode_text(TEXT.encode(encoding), RegistryError, "reference registry", "r.csv")
    line = info.value.one_line()
    assert "UTF-16" in line or "UTF-32" in line
    assert "re-save it as UTF-8" in line and "binary" not in line


def test_binary_and_invalid_utf8_name_what_and_where():
    with pytest.raises(SiteError, match="binary content"):
        decode_text(b"\x89PNG\r\n\x1a\n\x00\x00\x00\rIHDR", SiteError, "site file", "s.yaml")
    with pytest.raises(SiteError) as info:
        decode_text("site:\n  name: Caf\xe9\n".encode("latin-1"), SiteError, "site file", "s.yaml")
    assert info.value.line == 2 and "not UTF-8 text (byte 0xe9)" in info.value.one_line()


def test_a_registry_saved_by_a_spreadsheet_is_read(tmp_path):
    path = tmp_path / "refs.csv"
    path.write_bytes(codecs.BOM_UTF8 + TEXT.replace("\n", "\r\n").encode())
    registry = read_registry(path)
    assert len(registry) == 1 and registry.air_temp_c[0] == 2.0 and registry.notes == ("after the holography",)


# --- locked writers ----------------------------------------------------------------------


def _add_reference(registry: str, minute: int, barrier) -> int:
    barrier.wait()
    return main(
        [
            "reference",
            "add",
            "--references",
            registry,
            "--time",
            f"2026-01-15T09:{minute:02d}:00Z",
            "--air-temp-c",
            f"{minute / 10:.1f}",
            "--note",
            f"writer {minute}",
        ]
    )


def _child(target, args, barrier) -> None:
    try:
        status = target(*args, barrier) or 0
    except BaseException:
        status = 99
    os._exit(status)


def _run_writers(target, args_list) -> list[int]:
    """Run ``target(*args, barrier)`` in one forked process per entry, all released at once."""
    ctx = multiprocessing.get_context("fork")
    barrier = ctx.Barrier(len(args_list))
    procs = [ctx.Process(target=_child, args=(target, args, barrier)) for args in args_list]
    for proc in procs:
        proc.start()
    for proc in procs:
        proc.join()
    return [proc.exitcode for proc in procs]


def test_twenty_concurrent_reference_adds_keep_all_twenty_rows(tmp_path, capsys):
    registry = tmp_path / "refs.csv"
    statuses = _run_writers(_add_reference, [(str(registry), minute) for minute in range(20)])
    assert statuses == [0] * 20
    kept = read_registry(registry)
    assert len(kept) == 20
    assert sorted(kept.notes) == sorted(f"writer {m}" for m in range(20))
    assert [t.minute for t in kept.times_utc] == list(range(20))  # sorted by time
    assert not list(tmp_path.glob(".refs.csv.*.tmp"))  # no temporary file left


def _append(path: str, writer: int, barrier) -> None:
    barrier.wait()
    for k in range(50):
        append_line_locked(
            path, f'{{"writer": {writer}, "k": {k}, "pad": "{"x" * 200}"}}', AdvisorError, "attempt history"
        )


def test_twenty_concurrent_appenders_write_whole_lines(tmp_path):
    path = tmp_path / "attempts.jsonl"
    assert _run_writers(_append, [(str(path), w) for w in range(20)]) == [0] * 20
    lines = path.read_text().splitlines()
    assert len(lines) == 1000
    assert len(set(lines)) == 1000 and all(line.startswith('{"writer": ') and line.endswith('"}') for line in lines)


def test_a_held_lock_makes_another_writer_give_up_with_a_clear_line(tmp_path):
    path = tmp_path / "refs.csv"
    with (
        locked(path, RegistryError, "reference registry"),
        pytest.raises(RegistryError, match="another advisor has been writing the reference registry"),
        locked(path, RegistryError, "reference registry", wait_s=0),
    ):
        pass
    with locked(path, RegistryError, "reference registry", wait_s=0):  # released again
        pass
    assert (tmp_path / ".refs.csv.lock").exists()


def test_an_update_that_fails_leaves_the_file_untouched(tmp_path):
    path = tmp_path / "refs.csv"
    path.write_text(TEXT)

    def refuse(_old):
        raise RegistryError("no")

    with pytest.raises(RegistryError):
        update_text_locked(path, refuse, RegistryError, "registry")
    assert path.read_text() == TEXT
    assert update_text_locked(path, lambda old: old + "x\n", RegistryError, "registry") == TEXT + "x\n"


def test_a_replaced_file_keeps_its_permissions(tmp_path):
    path = tmp_path / "refs.csv"
    path.write_text(TEXT)
    path.chmod(0o640)
    fileio.atomic_write_text(path, TEXT + "x\n")
    assert path.stat().st_mode & 0o777 == 0o640


# --- outputs that would destroy inputs ---------------------------------------------------


def test_refuse_overwrite_sees_the_same_file_by_any_name(tmp_path, monkeypatch):
    feed = tmp_path / "feed.csv"
    feed.write_text("x")
    (tmp_path / "link.csv").symlink_to(feed)
    os.link(feed, tmp_path / "hard.csv")
    monkeypatch.chdir(tmp_path)
    for output in (feed, "feed.csv", "./sub/../feed.csv", tmp_path / "link.csv", tmp_path / "hard.csv"):
        with pytest.raises(UsageError) as info:
            refuse_overwrite(output, {"--feed": feed, "--history": None}, "--csv")
        assert "the --feed input; writing it would destroy the input" in info.value.one_line()
        assert info.value.field == "--csv"
    with pytest.raises(UsageError, match="the --rules input"):
        refuse_overwrite(feed, {"--rules": [tmp_path / "a.yaml", feed]}, "--csv")
    with pytest.raises(UsageError, match="one of its inputs"):
        refuse_overwrite(feed, [feed], "--out")
    refuse_overwrite(tmp_path / "other.csv", {"--feed": feed}, "--csv")  # a new file: fine
    refuse_overwrite("-", {"--feed": "-"}, "--csv")  # stdout
    refuse_overwrite(None, {"--feed": feed}, "--csv")


def test_replay_refuses_to_write_its_csv_over_its_feed(tmp_path, capsys):
    feed = tmp_path / "archive.csv"
    feed.write_bytes(GOOD_FEED.read_bytes())
    before = feed.read_bytes()
    status = main(["replay", "--feed", str(feed), "--csv", str(feed), "--no-cache"])
    err = capsys.readouterr().err
    assert status == 2 and feed.read_bytes() == before
    assert err.count("\n") == 1 and "--csv:" in err and "the --feed input" in err


def test_train_refuses_to_write_its_model_over_its_history(tmp_path, capsys):
    history = tmp_path / "history.csv"
    history.write_text("time,method,usable\n2026-01-01T03:00:00Z,scan,yes\n")
    before = history.read_bytes()
    status = main(["train", "--history", str(history), "--out", str(history)])
    err = capsys.readouterr().err
    assert status == 2 and history.read_bytes() == before
    assert err.count("\n") == 1 and "--out:" in err and "the --history input" in err
