"""advisory.html on a control-room wall (1920×1080) and a phone (390×844), in a real browser.

The page is laid out by Debian's chromium (headless, driven over its DevTools pipe, see
tests/browser.py); the test measures what a person would see without scrolling and reads the
screenshot's pixels.  Without chromium the browser tests are skipped, saying why, unless
``ADVISOR_REQUIRE_BROWSER=1`` (set by .ci/run, which installs chromium) makes that a failure.
Set ``ADVISOR_SCREENSHOT_DIR`` to keep the screenshots.

The weather is synthetic (tests/conftest.py); nothing here checks physics.
"""

from __future__ import annotations

import os
import re
from datetime import datetime, timedelta, timezone
from pathlib import Path

import pandas as pd
import pytest

from advisor.evaluation.advisory import reason_set, track_change, utc_text
from advisor.views.advisory import VERDICT_COLOURS, advisory_html
from advisor.views.callparts import blocked_names
from advisor.views.context import Context
from advisor.vocabulary import METHODS, VERDICT

from .browser import Browser, decode_png, find_chromium
from .conftest import NIGHT_UTC, weather_table

SIZES = {"wall": (1920, 1080, False), "phone": (390, 844, True)}
NEXT = {
    "scan": {"start_utc": "2026-01-16T06:10:00Z", "end_utc": "2026-01-16T09:00:00Z", "length_min": 170.0},
    "astronomical": None,
}


def _ctx(next_window=None) -> Context:
    return Context(
        site_name="Test Site (invented)",
        time_zone="America/Denver",
        feed_source="/data/mast.csv",
        is_demo=True,
        data_quality={},
        next_window=next_window,
    )


def _page(call, tmp_path: Path, name: str, issued_ago_min: float = 1.0, next_window=None) -> Path:
    issued = datetime.now(timezone.utc) - timedelta(minutes=issued_ago_min)
    change = track_change(None, call.verdict, reason_set(call.reasons), utc_text(issued), 6, False)
    path = tmp_path / f"{name}.html"
    path.write_text(advisory_html(call, _ctx(next_window), change, stale_after_min=15), encoding="utf-8")
    return path


@pytest.fixture()
def pages(call_for, tmp_path):
    return {
        "scan": (_page(call_for(weather_table()), tmp_path, "scan", next_window=NEXT), "scan"),
        "windy": (
            _page(call_for(weather_table(wind_mean_ms=6.0, wind_gust_ms=11.0)), tmp_path, "windy", next_window=NEXT),
            "postpone",
        ),
        "stale": (
            _page(call_for(weather_table(), at=NIGHT_UTC + pd.Timedelta(hours=5)), tmp_path, "stale"),
            "undetermined",
        ),
    }


# --- the page as a file ----------------------------------------------------------------------


def test_page_loads_nothing_from_elsewhere(pages):
    for path, _ in pages.values():
        text = path.read_text()
        assert not re.search(r"https?://|\bsrc=|@import|url\(|<link\b", text), path.name


def test_page_names_what_blocks_each_method_and_the_next_window(call_for, tmp_path):
    call = call_for(weather_table(wind_mean_ms=6.0, wind_gust_ms=11.0))
    text = _page(call, tmp_path, "windy", next_window=NEXT).read_text()
    for method in METHODS:
        assert "blocked by: " + blocked_names(call, method)[0] in text.replace("\u00a0", " ")
    assert 'id="next"' in text and "Next window: laser scan" in text and "for 2 h 50 min" in text.replace("\u00a0", " ")
    assert "Mean wind 6.0" in text.replace("\u00a0", " ")  # the cause, with its number


# --- the page in a browser ----------------------------------------------------------------------

MEASURE = """(() => {
  const box = (el) => { if (!el) return null; const r = el.getBoundingClientRect();
                        return {top: r.top, bottom: r.bottom, left: r.left, right: r.right, height: r.height}; };
  const q = (sel) => document.querySelector(sel);
  let biggest = 0, where = "";
  for (const el of document.querySelectorAll("body *")) {
    if (el.id === "verdict" || el.closest("#verdict") || !el.textContent.trim()) continue;
    const size = parseFloat(getComputedStyle(el).fontSize);
    if (size > biggest && el.getClientRects().length) { biggest = size; where = el.tagName + "#" + el.id; }
  }
  return {w: innerWidth, h: innerHeight, scrollWidth: document.scrollingElement.scrollWidth,
          verdict: box(q("#verdict")), verdictFont: parseFloat(getComputedStyle(q("#verdict")).fontSize),
          verdictText: q("#verdict").textContent, biggestOther: biggest, biggestWhere: where,
          age: box(q("#age")), ago: q("#ago").textContent, next: box(q("#next")),
          states: [...document.querySelectorAll(".method .state")].map(box),
          stale: box(q("#stale")), staleShown: getComputedStyle(q("#stale")).display !== "none",
          staleText: q("#stale").textContent};
})()"""


@pytest.fixture(scope="module")
def browser():
    if find_chromium() is None:
        if os.environ.get("ADVISOR_REQUIRE_BROWSER") == "1":
            pytest.fail("chromium is required here (ADVISOR_REQUIRE_BROWSER=1) but not installed")
        pytest.skip(
            "chromium is not installed: the page's layout cannot be checked here "
            "(apt-get install chromium; .ci/run installs it)"
        )
    with Browser.start() as b:
        yield b


def _keep(png: bytes, name: str) -> None:
    folder = os.environ.get("ADVISOR_SCREENSHOT_DIR")
    if folder:
        Path(folder).mkdir(parents=True, exist_ok=True)
        (Path(folder) / f"{name}.png").write_bytes(png)


def _hex(colour: str) -> tuple[int, int, int]:
    return tuple(int(colour[k : k + 2], 16) for k in (1, 3, 5))


@pytest.mark.parametrize("size", list(SIZES))
@pytest.mark.parametrize("kind", ["scan", "windy", "stale"])
def test_verdict_is_the_largest_thing_and_the_essentials_need_no_scrolling(browser, pages, kind, size):
    path, verdict = pages[kind]
    width, height, mobile = SIZES[size]
    page = browser.open(path, width, height, mobile)
    m = page.evaluate(MEASURE)
    assert (m["w"], m["h"]) == (width, height)
    assert m["scrollWidth"] <= width, "the page scrolls sideways"
    v = m["verdict"]
    assert m["verdictText"] == VERDICT[verdict].label
    assert m["verdictFont"] > 1.8 * m["biggestOther"], m  # by far the largest text on the page
    assert v["top"] < 0.2 * height and v["left"] >= 0 and v["right"] <= width, v
    for part in ("age", "next"):
        assert m[part]["top"] >= 0 and m[part]["bottom"] <= height, (part, m[part])
    assert len(m["states"]) == 2 and all(s["bottom"] <= height for s in m["states"]), m["states"]
    assert m["ago"].startswith("issued ") and m["ago"].endswith(" min ago") and not m["staleShown"]

    png = page.screenshot()
    _keep(png, f"advisory-{kind}-{size}")
    pixels = decode_png(png)
    assert pixels.shape == (height, width, 3)
    # the badge is painted where the page says it is, in the verdict's colour: sample its left
    # padding at mid-height, away from the rounded corners and the letters
    x = int(v["left"] + 0.1 * m["verdictFont"])
    y = int((v["top"] + v["bottom"]) / 2)
    expected = _hex(VERDICT_COLOURS[verdict][0])
    assert all(abs(int(a) - b) <= 12 for a, b in zip(pixels[y, x], expected)), (pixels[y, x], expected)
    page_bg = pixels[height - 2, width - 2]
    assert any(abs(int(a) - b) > 40 for a, b in zip(page_bg, expected))


@pytest.mark.parametrize("size", list(SIZES))
def test_a_stale_page_says_so_at_the_top(browser, call_for, tmp_path, size):
    path = _page(call_for(weather_table()), tmp_path, "old", issued_ago_min=125)
    width, height, mobile = SIZES[size]
    page = browser.open(path, width, height, mobile)
    m = page.evaluate(MEASURE)
    assert m["staleShown"] and m["staleText"].startswith("STALE: this advisory is 2 h 5 min old")
    assert m["stale"]["top"] < 0.05 * height and m["stale"]["bottom"] < m["verdict"]["top"]
    assert m["ago"] == "issued 2 h 5 min ago" and m["age"]["bottom"] <= height
    png = page.screenshot()
    _keep(png, f"advisory-stale-banner-{size}")
    pixels = decode_png(png)
    y, x = int((m["stale"]["top"] + m["stale"]["bottom"]) / 2), 4 + int(m["stale"]["left"])
    assert tuple(int(c) for c in pixels[y, x]) == (0xB0, 0x00, 0x20)  # the banner's red


def test_outlook_svg_is_self_contained_without_imitation_window(tmp_path, capsys):
    from advisor.commands.main import main

    path = tmp_path / "outlook.svg"
    assert main(["outlook", "--svg", str(path)]) == 0
    capsys.readouterr()
    svg = path.read_text()
    assert svg.startswith("<svg ") and svg.rstrip().endswith("</svg>")
    assert re.findall(r"https?://[^\s\"']*", svg) == ["http://www.w3.org/2000/svg"]  # the namespace, nothing fetched
    assert "@font-face" not in svg and 'url("' not in svg and "<image" not in svg
    assert "<circle" not in svg and "-title" not in svg  # no fake window buttons or title bar
    assert "<title>advisor outlook · " in svg
