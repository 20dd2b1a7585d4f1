"""The replay feature cache cannot go stale: its key covers every module that decides the features."""

from __future__ import annotations

import ast
import importlib.util
from pathlib import Path

from advisor.features import FEATURE_SOURCE_MODULES, FEATURES_VERSION, feature_source_paths
from advisor.io import featurecache


def _advisor_imports(module: str) -> set[str]:
    """Modules of the advisor package imported (at any depth in the file) by ``module``."""
    origin = importlib.util.find_spec(module).origin
    tree = ast.parse(Path(origin).read_text(encoding="utf-8"))
    found = set()
    for node in ast.walk(tree):
        if isinstance(node, ast.ImportFrom) and node.module and node.module.startswith("advisor"):
            found.add(node.module)
            for alias in node.names:  # "from advisor.physics import sun" imports a module
                candidate = f"{node.module}.{alias.name}"
                if importlib.util.find_spec(candidate.rsplit(".", 1)[0]) and _is_module(candidate):
                    found.add(candidate)
        elif isinstance(node, ast.Import):
            found.update(a.name for a in node.names if a.name.startswith("advisor"))
    return found


def _is_module(name: str) -> bool:
    try:
        return importlib.util.find_spec(name) is not None
    except ModuleNotFoundError:
        return False


def _closure(roots: tuple[str, ...]) -> set[str]:
    seen, todo = set(), list(roots)
    while todo:
        name = todo.pop()
        if name in seen or name == "advisor":
            continue
        seen.add(name)
        todo.extend(_advisor_imports(name) - seen)
    return {m for m in seen if not importlib.util.find_spec(m).origin.endswith("__init__.py")}


def test_cache_key_covers_the_import_closure_of_the_feature_code():
    # Row features are computed by advisor.features from a frame the feed reader made.
    closure = _closure(("advisor.features", "advisor.io.feed"))
    missing = closure - set(FEATURE_SOURCE_MODULES)
    assert not missing, f"modules that decide the features but are not in the cache key: {sorted(missing)}"


def test_every_listed_module_is_hashed_and_changes_the_key(tmp_path):
    paths = feature_source_paths()
    assert len(paths) == len(FEATURE_SOURCE_MODULES) and all(p.is_file() for p in paths)
    feed = tmp_path / "feed.csv"
    feed.write_text("time\n")
    copies = []
    for p in paths:
        copy = tmp_path / f"{len(copies)}.py"
        copy.write_bytes(p.read_bytes())
        copies.append(copy)
    base = featurecache.key_for(feed, None, None, {}, copies, FEATURES_VERSION)
    copies[-1].write_text(copies[-1].read_text() + "\n# edited\n")
    assert featurecache.key_for(feed, None, None, {}, copies, FEATURES_VERSION) != base
    assert featurecache.key_for(feed, None, None, {}, copies, FEATURES_VERSION + 1) != base


# --------------------------------------------------------------------------- the entries
# Invented values throughout: these tests check that bits come back, not any physics.
import json  # noqa: E402
import multiprocessing  # noqa: E402
import os  # noqa: E402
import shutil  # noqa: E402
import subprocess  # noqa: E402
import sys  # noqa: E402
import time  # noqa: E402

import numpy as np  # noqa: E402
import pandas as pd  # noqa: E402
import pytest  # noqa: E402

from advisor.commands.session import feed_layout  # noqa: E402
from advisor.features import STORED_ROW_FEATURES, complete_row_features, row_features_chunked  # noqa: E402
from advisor.io import columnfiles  # noqa: E402
from advisor.io.feed import read_feed  # noqa: E402
from advisor.io.references import read_registry  # noqa: E402
from advisor.io.site import load_site  # noqa: E402

ROOT = Path(__file__).resolve().parent.parent
DEMO = ROOT / "example_weather"
KEY = "0123456789abcdef0123456789abcdef01234567"


@pytest.fixture()
def cache(tmp_path, monkeypatch):
    monkeypatch.setenv("ADVISOR_CACHE_DIR", str(tmp_path / "cache"))
    return tmp_path / "cache" / "replay"  # the feature cache's folder in the advisor's cache


def _nan_with_payload() -> float:
    return float(np.array([0x7FF8_0000_0000_BEEF], dtype=np.int64).view(np.float64)[0])


def _edge_chunk(start: int, n: int, cats: list[str]) -> pd.DataFrame:
    """Every kind of column a cache keeps, with the values that lose bits when handled carelessly."""
    rng = np.random.default_rng(start)
    i = np.arange(start, start + n)
    specials = np.array([np.nan, np.inf, -np.inf, -0.0, 0.0, 5e-324, 1.7976931348623157e308, _nan_with_payload()])
    few = specials[i % len(specials)]
    many = rng.standard_normal(n)  # every value distinct: stored raw
    many[:: max(n // 7, 1)] = -0.0
    times = pd.date_range("2026-01-01", periods=n, freq="min", tz="UTC") + pd.Timedelta(minutes=start)
    times = times.where(i % 97 != 5, times + pd.Timedelta(seconds=17))  # irregular steps
    frame = pd.DataFrame(
        {
            "time": times,
            "naive": np.array(times.tz_localize(None)).astype("datetime64[s]"),
            "few": few,
            "many": many,
            "f32_exact": (i % 1000).astype(np.float64) / 8.0 + rng.integers(0, 1 << 20, n).astype(np.float32),
            "f32": rng.standard_normal(n).astype(np.float32),
            "constant": np.full(n, -0.0),
            "huge": np.where(i % 3 == 0, np.iinfo(np.int64).max, np.iinfo(np.int64).min + i % 5),
            "unsigned": np.where(i % 2 == 0, np.iinfo(np.uint64).max, i).astype(np.uint64),
            "small": (i % 7 - 3).astype(np.int8),
            "pointer": np.where(i < 3, -1, i - 1).astype(np.int64),  # a row pointer: none at first
            "flag": i % 3 == 0,
            "name": pd.Categorical.from_codes(np.where(i % 11 == 0, -1, i % len(cats)), categories=pd.Index(cats)),
            "string": pd.array([["", "b", None][k % 3] for k in i], dtype="str"),
        },
        index=pd.RangeIndex(start, start + n),
    )
    frame["text"] = pd.Series([["", "a", None, "ü x"][k % 4] for k in i], dtype=object, index=frame.index)
    return frame


def _same_bits(got: pd.DataFrame, want: pd.DataFrame) -> None:
    pd.testing.assert_frame_equal(got, want, check_exact=True)
    for name in want.columns:
        a, b = want[name].to_numpy(), got[name].to_numpy()
        if a.dtype.kind == "f":
            assert np.array_equal(a.view(f"i{a.itemsize}"), b.view(f"i{b.itemsize}")), name


def _write(key: str, chunks) -> None:
    with featurecache.Writer(key) as writer:
        for chunk in chunks:
            writer.add(chunk)


def test_every_dtype_and_edge_value_comes_back_bit_for_bit_chunk_by_chunk(cache):
    chunks = [
        _edge_chunk(0, 3000, ["", "A", "B"]),
        _edge_chunk(3000, 0, ["", "A", "B"]),  # an empty chunk keeps its place
        _edge_chunk(3000, 1, ["", "A", "B"]),
        _edge_chunk(3001, 2500, ["A", "C", "", "D"]),  # other categories
    ]
    _write(KEY, chunks)
    entry = featurecache.open_entry(KEY)
    assert entry is not None and entry.rows == 5501 and entry.chunk_rows == [3000, 0, 1, 2500]
    got = list(entry.chunks())
    assert len(got) == len(chunks)
    for g, want in zip(got, chunks, strict=True):
        _same_bits(g, want)
    manifest = json.loads((cache / KEY / "manifest.json").read_text())
    encodings = {c["name"]: (c["encoding"], c.get("bits"), c.get("raw_dtype")) for c in manifest["columns"]}
    assert encodings["constant"] == ("coded", 0, None)  # a constant takes no space per row
    assert encodings["flag"] == ("coded", 1, None)
    assert encodings["few"][:2] == ("coded", 3)
    assert encodings["many"] == ("raw", None, "<f8")
    assert encodings["f32_exact"][2] == "<f4" or encodings["f32_exact"][0] == "coded"
    assert encodings["pointer"][0] == "coded" and encodings["pointer"][1] <= 2 and encodings["time"][0] == "coded"


def test_one_chunk_round_trip_and_an_unknown_key(cache):
    frame = _edge_chunk(0, 500, ["x", ""])
    _write(KEY, [frame])
    (got,) = featurecache.open_entry(KEY).chunks()
    _same_bits(got, frame)
    assert featurecache.open_entry("f" * 40) is None


def test_codes_widen_and_give_way_to_plain_values_between_chunks(cache, monkeypatch):
    rng = np.random.default_rng(7)
    first = pd.DataFrame({"x": rng.integers(0, 60_000, 200_000) / 4.0, "y": rng.integers(0, 40, 200_000) / 8.0})
    second = pd.DataFrame({"x": rng.integers(60_000, 80_000, 50_000) / 4.0, "y": rng.standard_normal(50_000)})
    _write(KEY, [first, second])  # x passes 65,536 codes; y passes MAX_CODES below
    monkeypatch.setattr(columnfiles, "MAX_CODES", 1000)
    _write("k2", [first, second])
    floats32 = pd.DataFrame({"z": np.arange(5000) + 0.5})  # raw float32 first, then a float64 chunk
    _write("k3", [floats32, pd.DataFrame({"z": np.arange(5000) + 0.1})])
    for key, chunks in ((KEY, [first, second]), ("k2", [first, second])):
        for got, want in zip(featurecache.open_entry(key).chunks(), chunks, strict=True):
            _same_bits(got, want)
    got = list(featurecache.open_entry("k3").chunks())
    _same_bits(got[1], pd.DataFrame({"z": np.arange(5000) + 0.1}, index=pd.RangeIndex(0, 5000)))
    columns = {c["name"]: c for c in json.loads((cache / "k2" / "manifest.json").read_text())["columns"]}
    assert columns["y"]["encoding"] == "raw" and columns["x"]["encoding"] == "raw"


def test_a_writer_refuses_what_it_cannot_keep_and_leaves_nothing(cache):
    with pytest.raises(TypeError), featurecache.Writer(KEY) as writer:
        writer.add(pd.DataFrame({"d": pd.to_timedelta([1, 2], unit="s")}))
    with pytest.raises(ValueError, match="columns changed"), featurecache.Writer(KEY) as writer:
        writer.add(pd.DataFrame({"a": [1.0]}))
        writer.add(pd.DataFrame({"b": [1.0]}))
    with pytest.raises(ValueError, match="dtype"), featurecache.Writer(KEY) as writer:
        writer.add(pd.DataFrame({"a": [1.0]}))
        writer.add(pd.DataFrame({"a": [1]}))
    assert featurecache.open_entry(KEY) is None and list(cache.iterdir()) == []


def test_an_unwritable_cache_is_skipped_quietly(tmp_path, monkeypatch):
    blocker = tmp_path / "a-file"
    blocker.write_text("")
    monkeypatch.setenv("ADVISOR_CACHE_DIR", str(blocker / "cache"))
    _write(KEY, [pd.DataFrame({"a": [1.0]})])
    assert featurecache.open_entry(KEY) is None


@pytest.mark.parametrize("damage", ["truncated", "longer", "manifest", "version", "missing", "lane"])
def test_a_damaged_entry_reads_as_none_and_is_removed(cache, damage):
    _write(KEY, [_edge_chunk(0, 4000, ["a", "b"]), _edge_chunk(4000, 1000, ["a", "b"])])
    folder = cache / KEY
    manifest = json.loads((folder / "manifest.json").read_text())
    raw = folder / next(c["file"] for c in manifest["columns"] if c["encoding"] == "raw")
    lane = folder / manifest["lanes"][0]["file"]
    if damage == "truncated":
        raw.write_bytes(raw.read_bytes()[:-8])
    elif damage == "longer":
        lane.write_bytes(lane.read_bytes() + b"\0")
    elif damage == "manifest":
        (folder / "manifest.json").write_text('{"format": "advisor-feature-cache", "rows": ')
    elif damage == "version":
        (folder / "manifest.json").write_text(json.dumps({**manifest, "version": 0}))
    elif damage == "missing":
        (folder / manifest["columns"][0]["table"]).unlink()
    else:  # a lane's bits changed in place after the entry was opened: codes beyond their tables
        entry = featurecache.open_entry(KEY)
        lane.write_bytes(b"\xff" * lane.stat().st_size)
        with pytest.raises(featurecache.DamagedEntry):
            list(entry.chunks())
        assert not folder.exists()
        return
    assert featurecache.open_entry(KEY) is None
    assert not folder.exists()


def test_a_partial_entry_is_never_visible(cache):
    chunk = _edge_chunk(0, 1000, ["a"])
    first = featurecache.Writer(KEY)
    second = featurecache.Writer(KEY)
    for _ in range(3):
        first.add(chunk)
        second.add(chunk.iloc[:10])
        assert featurecache.open_entry(KEY) is None
        assert [p for p in cache.iterdir() if not p.name.startswith(".")] == []
    first.commit()
    second.commit()  # the key is taken: the first entry stays whole
    entry = featurecache.open_entry(KEY)
    assert entry.chunk_rows == [1000, 1000, 1000]
    assert list(cache.iterdir()) == [cache / KEY]
    aborted = featurecache.Writer("other")
    aborted.add(chunk)
    aborted.abort()
    assert list(cache.iterdir()) == [cache / KEY]


def _write_in_a_process(cache_dir: str, key: str) -> None:
    import os

    os.environ["ADVISOR_CACHE_DIR"] = cache_dir
    _write(key, [_edge_chunk(start, 20_000, ["a", "b"]) for start in range(0, 100_000, 20_000)])


def test_concurrent_writers_and_readers_see_whole_entries(cache):
    context = multiprocessing.get_context("spawn")
    writers = [context.Process(target=_write_in_a_process, args=(str(cache.parent), KEY)) for _ in range(3)]
    for p in writers:
        p.start()
    seen = 0
    give_up = time.monotonic() + 300  # a hang guard, not a timing: the writers take a second or two
    while (any(p.is_alive() for p in writers) or seen == 0) and time.monotonic() < give_up:
        entry = featurecache.open_entry(KEY)
        if entry is not None:  # whole, or not there at all
            assert entry.chunk_rows == [20_000] * 5
            seen += 1
    for p in writers:
        p.join()
        assert p.exitcode == 0
    for got, start in zip(featurecache.open_entry(KEY).chunks(), range(0, 100_000, 20_000), strict=True):
        _same_bits(got, _edge_chunk(start, 20_000, ["a", "b"]))
    assert [p.name for p in cache.iterdir()] == [KEY]


def test_only_the_newest_entries_are_kept(cache):
    cache.mkdir(parents=True)
    (cache / "old-format.npz").write_bytes(b"PK")
    for k in range(featurecache.MAX_ENTRIES + 2):
        _write(f"key{k}", [pd.DataFrame({"a": [float(k)]})])
        import os

        os.utime(cache / f"key{k}", (1_000_000 + k, 1_000_000 + k))
    _write("newest", [pd.DataFrame({"a": [1.0]})])
    kept = sorted(p.name for p in cache.iterdir())
    assert len(kept) == featurecache.MAX_ENTRIES and "newest" in kept and "key0" not in kept


# --------------------------------------------------------------------------- the row features
def _messy_feed(path: Path) -> Path:
    """The demo archive with gaps, repeats, a late row, missing and implausible values."""
    lines = (DEMO / "larch_basin_archive_sample.csv").read_text(encoding="utf-8").splitlines(keepends=True)
    header, rows = lines[0], lines[1:3001]

    def change(i: int, column: int, value: str) -> None:
        parts = rows[i].rstrip("\n").split(",")
        parts[column] = value
        rows[i] = ",".join(parts) + "\n"

    change(99, 7, "")  # missing visibility
    change(503, 2, "0.1")  # gust below the mean
    change(700, 4, "150.0")  # humidity beyond 100 %
    change(1250, 1, "")  # missing wind
    change(1800, 3, "5.0")  # a frosty row: below freezing
    del rows[2001:2040]  # a gap
    rows.insert(1001, rows[1000])  # an exact repeat
    rows.insert(1520, rows.pop(1500))  # a late row
    path.write_text(header + "".join(rows), encoding="utf-8")
    return path


@pytest.mark.parametrize("feed", ["demo", "messy"])
def test_completed_stored_features_are_the_computed_ones(cache, tmp_path, feed):
    site = load_site(None)
    path = DEMO / "larch_basin_archive_sample.csv" if feed == "demo" else _messy_feed(tmp_path / "messy.csv")
    frame = read_feed(path, feed_layout(site, named_on_command_line=True)).frame
    frame = frame[frame["kind"] == "observed"]
    registry = read_registry(DEMO / "larch_basin_archive_references.csv")
    times = pd.DatetimeIndex(frame["time"]).as_unit("ns")
    chunks = []
    full = row_features_chunked(frame, times, site, registry, chunk_rows=1234)
    for start in range(0, len(full), 1234):
        chunks.append(full.iloc[start : start + 1234].reset_index(drop=True))
    assert {"below_freezing", "fog", "has_reference"} <= set(full.columns) - set(STORED_ROW_FEATURES)
    assert full["below_freezing"].any() and not full["has_reference"].all()
    if feed == "messy":  # rows the feed refused: features from the sample before, not the latest row
        assert not full["data_ok"].all() and (full["source_row"] != full["latest_row"]).any()
    _write(KEY, [c[list(STORED_ROW_FEATURES)] for c in chunks])
    entry = featurecache.open_entry(KEY)
    assert entry.chunk_rows == [len(c) for c in chunks]
    for stored, want in zip(entry.chunks(), chunks, strict=True):
        _same_bits(complete_row_features(stored, site), want)


def test_an_entry_is_smaller_than_the_archive(cache, tmp_path):
    """A month at 1 minute (invented by benchmarks/make_archive.py): the stored features in fewer bytes.

    Each coded column's table of distinct values is paid once, so a longer archive does better
    (a year: about 58 bytes a row against 63 in its CSV).
    """
    csv = tmp_path / "month.csv"
    subprocess.run(
        [sys.executable, str(ROOT / "benchmarks" / "make_archive.py"), "--start", "2025-12-01", "--days", "30"]
        + ["--out", str(csv)],
        check=True,
        capture_output=True,
    )
    site = load_site(None)
    frame = read_feed(csv, feed_layout(site, named_on_command_line=True)).frame
    registry = read_registry(tmp_path / "month_references.csv")
    times = pd.DatetimeIndex(frame["time"]).as_unit("ns")
    full = row_features_chunked(frame, times, site, registry, chunk_rows=5000)
    _write(KEY, [full.iloc[s : s + 5000][list(STORED_ROW_FEATURES)] for s in range(0, len(full), 5000)])
    size = sum(p.stat().st_size for p in (cache / KEY).iterdir())
    assert size < csv.stat().st_size
    shutil.rmtree(cache / KEY)


def test_an_archive_is_hashed_once_and_again_when_it_changes(cache, tmp_path, monkeypatch):
    """The digest of a large archive is remembered by file identity; an edit (same size, new
    modification time) gives another key."""
    archive = tmp_path / "archive.csv"
    archive.write_text("time,wind_mean_ms\n2026-01-01T00:00:00Z,1.0\n", encoding="utf-8")
    old = time.time() - 60  # written a minute ago: settled
    os.utime(archive, (old, old))
    first = featurecache.key_for(archive, None, None, {})
    opened = []
    real_open = Path.open

    def counting_open(self, *args, **kwargs):
        opened.append(self)
        return real_open(self, *args, **kwargs)

    monkeypatch.setattr(Path, "open", counting_open)
    assert featurecache.key_for(archive, None, None, {}) == first
    assert archive not in opened  # remembered, not read again
    archive.write_text("time,wind_mean_ms\n2026-01-01T00:00:00Z,2.0\n", encoding="utf-8")
    os.utime(archive, (old + 1, old + 1))
    assert featurecache.key_for(archive, None, None, {}) != first
    assert archive in opened


def test_a_file_written_just_now_is_not_remembered(cache, tmp_path):
    archive = tmp_path / "archive.csv"
    archive.write_text("time,wind_mean_ms\n", encoding="utf-8")
    featurecache.key_for(archive, None, None, {})
    memo = cache / "hashes.json"
    assert not memo.exists() or str(archive.resolve()) not in json.loads(memo.read_text(encoding="utf-8"))
