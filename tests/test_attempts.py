"""Closing the loop: attempts recorded by command, the model retrained from them, shown and used.

Every run works on a temporary copy of the invented demo site (its feed, registry, history and
model), never on the committed files.  No number from the invented data is a check value: the
tests compare the recorded weather with what ``check`` reports at the same instant, and the
retrained odds with the odds before retraining.
"""

from __future__ import annotations

import json
import multiprocessing
import shutil
import xml.etree.ElementTree as ET
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from advisor.commands.main import main
from advisor.io.history import COLUMNS, WEATHER_COLUMNS, read_history

from .conftest import run_cli

ROOT = Path(__file__).resolve().parent.parent
DEMO = ROOT / "example_weather"
DEMO_FILES = (
    "larch_basin.yaml",
    "larch_basin_mast.csv",
    "references.csv",
    "larch_basin_history.csv",
    "larch_basin_model.json",
    "larch_basin_forecast.csv",
)
FOG = pd.Timestamp("2026-11-30T15:00:00Z")  # the demo week's valley fog (see example_weather/README.md)
EVENING = pd.Timestamp("2026-12-01T03:00:00Z")  # its calm, dry evening (the feed's last sample)


def _utc(t: pd.Timestamp) -> str:
    return t.strftime("%Y-%m-%dT%H:%M:%SZ")


@pytest.fixture()
def site(tmp_path) -> Path:
    """A copy of the demo site folder; returns its site file."""
    for name in DEMO_FILES:
        shutil.copy(DEMO / name, tmp_path / name)
    return tmp_path / "larch_basin.yaml"


def _add(capsys, site, method="scan", usable="yes", at=EVENING, *extra):
    return run_cli(
        capsys, "attempt", "add", "--site", site, "--method", method, "--usable", usable, "--time", _utc(at), *extra
    )


def _check(capsys, site, at) -> dict:
    status, out, err = run_cli(capsys, "check", "--site", site, "--at", _utc(at), "--json")
    assert status in (0, 10, 11, 12), err
    return json.loads(out)


# --- attempt add ----------------------------------------------------------------------------


def test_an_attempt_carries_the_weather_check_sees_at_its_time(capsys, site):
    history = site.parent / "larch_basin_history.csv"
    before = history.read_text(encoding="utf-8").splitlines()
    at = pd.Timestamp("2026-11-30T20:00:00Z")  # the windy afternoon
    status, out, err = _add(capsys, site, "scan", "no", at, "--residual-um", "310", "--note", 'panel 14, "noisy"')
    assert status == 0, err
    assert f"recorded laser scan attempt at {_utc(at)} (usable: no, residual 310 µm)" in out
    assert "weather from" in out and "gusts" in out
    after = history.read_text(encoding="utf-8").splitlines()
    assert len(after) == len(before) + 1
    # older rows keep their text; the columns the file lacked (dew point, note) are blank in them
    assert after[1 : len(before)] == [line + ",," for line in before[1:]]
    assert after[0] == before[0] + ",dew_point_c,note"
    row = pd.read_csv(history, dtype=str, keep_default_na=False).iloc[-1]
    assert (row["time"], row["method"], row["usable"], row["residual_rms_um"]) == (_utc(at), "scan", "no", "310")
    assert row["note"] == 'panel 14, "noisy"'
    seen = _check(capsys, site, at)["features"]
    for name in WEATHER_COLUMNS:
        assert float(row[name]) == pytest.approx(seen[name], rel=1e-5, abs=1e-4), name


def test_a_new_history_file_gets_the_full_header(capsys, site, tmp_path):
    text = site.read_text(encoding="utf-8").replace("path: larch_basin_history.csv", "path: season/attempts.csv")
    site.write_text(text, encoding="utf-8")
    (tmp_path / "season").mkdir()
    status, _, err = _add(capsys, site, "astronomical", "yes", EVENING)
    assert status == 0, err
    table = pd.read_csv(tmp_path / "season" / "attempts.csv")
    assert tuple(table.columns) == COLUMNS and len(table) == 1
    assert read_history(tmp_path / "season" / "attempts.csv").frame["usable"].tolist() == [True]


def _one_error_line(status, out, err, *parts):
    assert status == 2 and out == "" and err.startswith("advisor: error: ") and err.count("\n") == 1, err
    for part in parts:
        assert part in err, (part, err)


@pytest.mark.parametrize(
    "at, parts",
    [
        (pd.Timestamp("2026-11-20T00:00:00Z"), ("is before the feed starts", "2026-11-24T03:00Z")),
        (pd.Timestamp("2026-12-01T04:00:00Z"), ("is after the feed ends", "2026-12-01T03:00Z")),
        (pd.Timestamp("2026-11-24T03:10:00Z"), ("too little for the temperature rate",)),
    ],
)
def test_times_the_feed_does_not_cover_are_refused(capsys, site, at, parts):
    history = site.parent / "larch_basin_history.csv"
    before = history.read_bytes()
    _one_error_line(
        *_add(capsys, site, "scan", "yes", at),
        "larch_basin_mast.csv",
        "--time",
        "no weather for the attempt",
        "nothing was added",
        *parts,
    )
    assert history.read_bytes() == before


def test_a_duplicate_is_refused_and_nothing_is_written(capsys, site):
    history = site.parent / "larch_basin_history.csv"
    assert _add(capsys, site, "astronomical", "yes", EVENING)[0] == 0
    before = history.read_bytes()
    n_lines = len(before.decode().splitlines())
    _one_error_line(
        *_add(capsys, site, "astronomical", "no", EVENING + pd.Timedelta(seconds=30)),
        f"larch_basin_history.csv:{n_lines}: time: an astronomical attempt at {_utc(EVENING)} is already recorded",
        "nothing was added",
    )
    assert history.read_bytes() == before
    assert _add(capsys, site, "scan", "yes", EVENING)[0] == 0  # the other method at that time is another attempt


@pytest.mark.parametrize(
    "argv, parts",
    [
        (["--time", "2099-01-01T00:00:00Z"], ("is in the future",)),
        (["--residual-um", "-3"], ("--residual-um", "must be zero or a positive")),
        (["--residual-um", "abc"], ("--residual-um", "not a number")),
        (["--time", "yesterday-ish"], ("--time", "cannot read time")),
    ],
)
def test_bad_options_are_one_line(capsys, site, argv, parts):
    status, out, err = run_cli(capsys, "attempt", "add", "--site", site, "--method", "scan", "--usable", "yes", *argv)
    _one_error_line(status, out, err, *parts)


def test_the_bundled_demo_history_is_read_only(capsys):
    status, out, err = run_cli(capsys, "attempt", "add", "--method", "scan", "--usable", "yes")
    _one_error_line(status, out, err, "--history", "read-only")


def test_the_demo_weather_is_never_recorded_unasked(capsys, tmp_path):
    history = tmp_path / "mine.csv"
    status, out, err = run_cli(
        capsys, "attempt", "add", "--history", history, "--method", "scan", "--usable", "yes", "--time", _utc(EVENING)
    )
    _one_error_line(status, out, err, "--feed", "never recorded unasked")
    assert not history.exists()
    status, out, err = run_cli(
        capsys,
        "attempt",
        "add",
        "--history",
        history,
        "--method",
        "scan",
        "--usable",
        "yes",
        "--time",
        _utc(EVENING),
        "--feed",
        DEMO / "larch_basin_mast.csv",
    )
    assert status == 0, err
    assert len(read_history(history).frame) == 1


def test_attempt_list_shows_the_newest(capsys, site):
    assert _add(capsys, site, "scan", "no", EVENING, "--note", "after the front")[0] == 0
    status, out, err = run_cli(capsys, "attempt", "list", "--site", site, "--last", "2")
    assert status == 0, err
    lines = out.splitlines()
    assert "421 (238 laser scan, 183 astronomical); 421 carry their weather" in lines[0]
    assert len(lines) == 4 and lines[-1].strip().startswith(_utc(EVENING)) and "after the front" in lines[-1]


def _add_in_child(site: str, minute: int, out: multiprocessing.Queue) -> None:
    import contextlib
    import io

    at = pd.Timestamp("2026-11-29T06:00:00Z") + pd.Timedelta(minutes=minute)
    with contextlib.redirect_stdout(io.StringIO()), contextlib.redirect_stderr(io.StringIO()) as err:
        status = main(["attempt", "add", "--site", site, "--method", "scan", "--usable", "yes", "--time", _utc(at)])
    out.put((minute, status, err.getvalue()))


def test_concurrent_adds_keep_every_row(site):
    """Eight processes record at once: the lock makes them take turns, so none loses another's row."""
    history = site.parent / "larch_basin_history.csv"
    n_before = len(read_history(history).frame)
    ctx = multiprocessing.get_context("fork")
    queue = ctx.Queue()
    children = [ctx.Process(target=_add_in_child, args=(str(site), 3 * k, queue)) for k in range(8)]
    for child in children:
        child.start()
    results = [queue.get(timeout=120) for _ in children]
    for child in children:
        child.join(timeout=60)
    assert all(status == 0 for _, status, _ in results), results
    frame = read_history(history).frame
    assert len(frame) == n_before + 8
    added = frame["time"][frame["time"] >= pd.Timestamp("2026-11-29T06:00:00Z")]
    assert sorted(added.dt.minute.tolist()) == [3 * k for k in range(8)]
    assert not list(site.parent.glob(".*.tmp"))


# --- the round trip -------------------------------------------------------------------------


def test_recorded_outcomes_move_the_retrained_odds(capsys, site):
    """Astronomical attempts in the demo week's fog, recorded as failures through the command,
    then `train --install`: the site model's astronomical odds in fog fall, its laser odds and its
    odds on the calm evening stay where they were."""
    old_fog, old_evening = _check(capsys, site, FOG)["candidates"], _check(capsys, site, EVENING)["candidates"]
    for t in pd.date_range("2026-11-30T13:10Z", "2026-11-30T16:50Z", freq="10min"):
        status, _, err = _add(capsys, site, "astronomical", "no", t)
        assert status == 0, err
    old_model = (site.parent / "larch_basin_model.json").read_bytes()
    status, out, err = run_cli(capsys, "train", "--site", site, "--install")
    assert status == 0, err
    assert "443 attempts" in out and "443 recorded with the attempt" in out
    assert "installed: " in out and "(was larch_basin_model.json; that file is kept)" in out
    assert (site.parent / "larch_basin_model.json").read_bytes() == old_model
    new_fog, new_evening = _check(capsys, site, FOG)["candidates"], _check(capsys, site, EVENING)["candidates"]
    assert new_fog["astronomical"]["p_usable"] < old_fog["astronomical"]["p_usable"] - 0.2
    assert new_fog["scan"]["p_usable"] == pytest.approx(old_fog["scan"]["p_usable"], abs=0.02)
    for method in ("scan", "astronomical"):
        assert new_evening[method]["p_usable"] == pytest.approx(old_evening[method]["p_usable"], abs=0.05)


def test_train_completes_rows_without_weather_from_the_feed(capsys, site):
    """A row typed by hand (time, method, outcome only) is completed from the site's feed; the
    rows with their own weather keep it."""
    history = site.parent / "larch_basin_history.csv"
    with history.open("a", encoding="utf-8") as fh:
        fh.write(f"{_utc(FOG)},astronomical,no\n{_utc(EVENING)},scan,yes\n2026-12-20T03:00:00Z,scan,yes\n")
    status, out, err = run_cli(capsys, "train", "--site", site, "--out", site.parent / "m.json")
    assert status == 0, err
    assert f"420 recorded with the attempt, 2 computed from the feed {site.parent / 'larch_basin_mast.csv'}" in out
    assert "1 without usable weather" in out and "1 attempts left out" in out
    assert "to use it, set line" in out and "path: m.json" in out


# --- the site file: history, model terms and installing a model ----------------------------


@pytest.mark.parametrize(
    "terms, parts",
    [
        (
            "[{feature: wind_gusts_ms, transform: square, direction: lowers}]",
            ("unknown feature 'wind_gusts_ms'", "did you mean 'wind_gust_ms'"),
        ),
        ("[{feature: wind_gust_ms, transform: cube, direction: lowers}]", ("unknown transform 'cube'",)),
        ("[{feature: wind_gust_ms, transform: square}]", ("model.terms.0.direction", "missing value")),
        ("[{feature: wind_gust_ms, transform: square, direction: down}]", ("unknown direction 'down'",)),
        ("[{feature: dew_point_spread_c, transform: shortfall, direction: lowers}]", ("model.terms.0.knot",)),
        ("[{feature: wind_gust_ms, knot: 3, direction: lowers}]", ("only a shortfall term has a knot",)),
        ("[{feature: fog, transform: square, direction: lowers}]", ("is a flag",)),
        ("[{feature: freq_ghz, direction: lowers}]", ("the same for every attempt",)),
        ("[{feature: wind_gust_ms, direction: lowers, methods: [scan]}]", ("no term for the astronomical method",)),
        (
            "[{feature: wind_gust_ms, direction: lowers}, {feature: wind_gust_ms, direction: raises}]",
            ("the same term as model.terms[0]",),
        ),
    ],
)
def test_model_terms_in_the_site_file_are_checked(capsys, site, terms, parts):
    text = site.read_text(encoding="utf-8")
    start = text.index("  terms:\n")
    end = text.index("\n\n", start)
    site.write_text(text[:start] + f"  terms: {terms}" + text[end:], encoding="utf-8")
    status, out, err = run_cli(capsys, "check", "--site", site, "--at", _utc(EVENING))
    _one_error_line(status, out, err, "larch_basin.yaml:", *parts)


def test_site_terms_choose_what_train_fits(capsys, site):
    text = site.read_text(encoding="utf-8")
    start = text.index("  terms:\n")
    end = text.index("\n\n", start)
    site.write_text(
        text[:start] + "  terms:\n"
        "    - {feature: wind_gust_ms, transform: square, direction: lowers}\n"
        "    - {feature: rel_humidity_pct, direction: lowers, methods: [scan]}\n" + text[end:],
        encoding="utf-8",
    )
    status, out, err = run_cli(capsys, "train", "--site", site, "--out", site.parent / "m.json")
    assert status == 0, err
    from advisor.model.modelfile import load_model

    model = load_model(site.parent / "m.json")
    assert [t.name for t in model.methods["scan"].terms] == ["wind_gust_ms_sq", "rel_humidity_pct"]
    assert [t.name for t in model.methods["astronomical"].terms] == ["wind_gust_ms_sq"]
    assert all(t.direction == "lowers" for m in model.methods.values() for t in m.terms)
    assert model.training["terms_from"] == "site file (model.terms)"


def test_install_points_the_site_at_the_new_model_and_keeps_comments(tmp_path, site):
    from advisor.io.site import load_site
    from advisor.io.siteedit import install_model_path, model_path_change

    new = tmp_path / "models" / "spring.json"
    new.parent.mkdir()
    shutil.copy(tmp_path / "larch_basin_model.json", new)
    before = site.read_text(encoding="utf-8")
    change = model_path_change(site, new)
    assert change.line_text == "  path: models/spring.json" and change.old_value == "larch_basin_model.json"
    assert site.read_text(encoding="utf-8") == before  # nothing written yet
    install_model_path(site, new)
    after = site.read_text(encoding="utf-8")
    assert after.splitlines()[change.line - 1] == "  path: models/spring.json"
    assert [a for a, b in zip(after.splitlines(), before.splitlines()) if a != b] == ["  path: models/spring.json"]
    assert load_site(site).model_path.resolve() == new.resolve()
    # a site without a model section gets one
    bare = tmp_path / "bare.yaml"
    bare.write_text("site: {name: bare, latitude_deg: 1, longitude_deg: 2, dish_diameter_m: 10}\n", encoding="utf-8")
    install_model_path(bare, new)
    assert load_site(bare).model_path.resolve() == new.resolve()


def test_install_never_overwrites_the_model_in_use(capsys, site):
    status, out, err = run_cli(
        capsys, "train", "--site", site, "--install", "--out", site.parent / "larch_basin_model.json"
    )
    _one_error_line(status, out, err, "--out", "the model the site uses now")


def test_reference_add_takes_the_air_temperature_from_the_feed(capsys, site):
    at = pd.Timestamp("2026-11-30T06:00:00Z")
    status, out, err = run_cli(capsys, "reference", "add", "--site", site, "--time", _utc(at))
    assert status == 0, err
    seen = _check(capsys, site, at)["features"]["air_temp_c"]
    assert f"({seen:.1f} °C, from the feed" in out
    registry = pd.read_csv(site.parent / "references.csv")
    assert registry.loc[registry["time"] == _utc(at), "air_temp_c"].item() == pytest.approx(seen, abs=0.05)
    status, out, err = run_cli(capsys, "reference", "add", "--site", site, "--time", "2026-12-05T00:00:00Z")
    _one_error_line(status, out, err, "is after the feed ends", "give --air-temp-c")


# --- what a tick keeps, what model show draws -----------------------------------------------


def test_tick_history_lines_carry_the_weather_and_the_odds(capsys, site, tmp_path):
    state = tmp_path / "state"
    status, _, err = run_cli(capsys, "tick", "--site", site, "--at", _utc(EVENING), "--state-dir", state)
    assert status == 0, err
    line = json.loads((state / "history.jsonl").read_text(encoding="utf-8").splitlines()[-1])
    doc = _check(capsys, site, EVENING)
    assert set(line["weather"]) == set(WEATHER_COLUMNS)
    for name in WEATHER_COLUMNS:
        assert line["weather"][name] == pytest.approx(doc["features"][name], abs=1e-4), name
    for method, cand in doc["candidates"].items():
        assert line["p_usable"][method] == pytest.approx(cand["p_usable"], abs=1e-4)
        assert line["odds_extrapolated"][method] is cand["extrapolated"]


def test_model_show_draws_a_self_contained_svg(capsys, tmp_path):
    svg = tmp_path / "model.svg"
    status, out, err = run_cli(capsys, "model", "show", DEMO / "larch_basin_model.json", "--svg", svg)
    assert status == 0, err
    assert "ROC AUC" in out and f"wrote {svg}" in out  # the tables are still printed
    text = svg.read_text(encoding="utf-8")
    root = ET.fromstring(text)  # well-formed XML
    assert root.tag == "{http://www.w3.org/2000/svg}svg"
    for forbidden in ("<script", "href", "@font-face", "url(", "<image", "<foreignObject", "@import"):
        assert forbidden not in text, forbidden
    texts = " ".join(t.text or "" for t in root.iter("{http://www.w3.org/2000/svg}text"))
    assert "reliability (cross-validated)" in texts and "gusts squared" in texts and "|temperature change|" in texts
    fonts = {e.get("font-family") for e in root.iter() if e.get("font-family")}
    assert fonts == {"sans-serif"}
    # one reliability dot per non-empty bin, per method
    from advisor.model.modelfile import load_model

    model = load_model(DEMO / "larch_basin_model.json")
    bins = sum(1 for m in model.methods.values() for r in m.metrics["reliability"] if r["attempts"])
    assert len(list(root.iter("{http://www.w3.org/2000/svg}circle"))) == bins


def test_effect_curves_follow_the_declared_direction():
    """Each drawn curve of a 'lowers' term never rises: the picture can't say the opposite."""
    from advisor.model.modelfile import load_model
    from advisor.views.model_svg import effect_curve

    model = load_model(DEMO / "larch_basin_model.json")
    for m in model.methods.values():
        for k, term in enumerate(m.terms):
            x, p = effect_curve(m, k)
            assert term.direction == "lowers"
            along = np.diff(p) if term.transform != "shortfall" else -np.diff(p)
            if term.transform in ("square", "abs"):  # |x| and x² fall then rise across zero
                along = np.diff(p[x >= 0])
            assert np.all(along <= 1e-12), term.name


def test_install_refuses_a_site_file_it_cannot_edit_safely_before_writing_anything(capsys, site):
    text = site.read_text(encoding="utf-8")
    start = text.index("model:\n")
    end = text.index("\n\n", start)
    site.write_text(text[:start] + "model: {path: larch_basin_model.json}" + text[end:], encoding="utf-8")
    before = sorted(p.name for p in site.parent.iterdir())
    status, out, err = run_cli(capsys, "train", "--site", site, "--install")
    _one_error_line(status, out, err, "model: is written on one line", "'model:' then")
    assert sorted(p.name for p in site.parent.iterdir()) == before


def test_a_long_feed_is_read_from_its_tail_only_when_the_tail_covers_the_time(monkeypatch):
    """Recording now reads the feed's tail (as check does); an older time reads it whole; both
    give the weather a whole read gives."""
    from advisor.io import feed as feed_module
    from advisor.io.site import load_site
    from advisor.model import attempts

    site = load_site(None)
    whole = feed_module.read_feed(site.feed.path, site.feed)
    calls = []
    real = feed_module.read_feed

    def spy(path, layout, tail_bytes=None, **kw):
        calls.append(tail_bytes)
        return real(path, layout, tail_bytes=tail_bytes, **kw)

    monkeypatch.setattr(attempts, "CHECK_TAIL_BYTES", 20_000)  # about 5 h of the demo mast
    monkeypatch.setattr(attempts, "read_feed", spy)
    for at, reads in ((EVENING, [20_000]), (FOG, [20_000, None])):
        calls.clear()
        feed = attempts.read_feed_for(site.feed.path, site.feed, [at])
        assert calls == reads, at
        got = attempts.weather_at(feed.frame, pd.DatetimeIndex([at]), site)
        want = attempts.weather_at(whole.frame, pd.DatetimeIndex([at]), site)
        pd.testing.assert_frame_equal(got, want)


def test_model_show_never_draws_over_the_model(capsys, tmp_path):
    model = tmp_path / "model.json"
    shutil.copy(DEMO / "larch_basin_model.json", model)
    before = model.read_bytes()
    status, out, err = run_cli(capsys, "model", "show", model, "--svg", model)
    _one_error_line(status, out, err, "--svg", "would destroy the input")
    assert model.read_bytes() == before
