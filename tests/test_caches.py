"""The caches of checked rule sets and parsed YAML (advisor.io.jsoncache): the same results as
without them, never stale, a damaged entry never trusted; and what ``check`` keeps off its path."""

from __future__ import annotations

import json
import os
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

from advisor.commands import session
from advisor.errors import RulesError, SiteError
from advisor.features import CATALOGUE
from advisor.io import jsoncache, yamlcache, yamlio
from advisor.io.site import load_site
from advisor.rules import loader, stored

ROOT = Path(__file__).resolve().parent.parent


@pytest.fixture()
def cache(tmp_path, monkeypatch):
    monkeypatch.setenv("ADVISOR_CACHE_DIR", str(tmp_path / "cache"))
    return tmp_path / "cache"


def _entries(folder: Path) -> list[Path]:
    return sorted(folder.glob("*.json")) if folder.exists() else []


def _fields(ruleset):
    rules = [
        (
            r.id,
            r.applies_to,
            r.condition_text,
            r.effect,
            r.message,
            r.error_text,
            r.error_scale,
            r.source,
            r.line,
            r.layer,
            r.overrides,
            r.condition.names,
            r.condition.kind,
            r.condition.unit,
            r.condition.needs_inputs,
            r.condition.ast,
            None if r.error is None else (r.error.ast, r.error.unit),
        )
        for r in ruleset
    ]
    return rules, ruleset.sources, ruleset.disabled


MINE = (
    "rules:\n"
    "  - id: fog_blinds_laser\n"
    "    enabled: false\n"
    "  - id: calm_bonus\n"
    "    applies_to: scan\n"
    "    condition: wind_gust_ms < 1 m/s and not fog\n"
    "    effect: add_error\n"
    "    error_um: 0.5 * wind_gust_ms * 1 um\n"
    "    message: calm\n"
)


# --------------------------------------------------------------------------- rule sets


def test_a_rule_set_comes_back_from_the_cache_the_same(cache, monkeypatch, tmp_path):
    site = load_site(None)
    extra = tmp_path / "mine.yaml"
    extra.write_text(MINE)
    first = session.load_ruleset(site, [extra])
    uncached = loader.load_rules(session.rule_files(site, [extra]), CATALOGUE)
    assert _fields(first) == _fields(uncached)
    assert len(_entries(cache / "rules")) == 1

    def no_lint(*_a, **_k):
        raise AssertionError("the rule files were read and linted again")

    monkeypatch.setattr(loader, "load_rules", no_lint)
    again = session.load_ruleset(site, [extra])
    assert _fields(again) == _fields(first)
    columns = {"wind_gust_ms": np.array([0.5, 3.0, np.nan]), "fog": np.array([False, False, True])}
    calm = [r for r in again if r.id == "calm_bonus"][0]
    assert np.array_equal(calm.condition.evaluate(columns, length=3), [True, False, False])
    assert np.allclose(calm.error.evaluate(columns, length=3), [0.25, 1.5, np.nan], equal_nan=True)


def test_an_edited_rule_file_is_read_again(cache, tmp_path):
    site = load_site(None)
    extra = tmp_path / "mine.yaml"
    extra.write_text("rules:\n  - id: fog_blinds_laser\n    enabled: false\n")
    assert "fog_blinds_laser" not in {r.id for r in session.load_ruleset(site, [extra])}
    extra.write_text("rules:\n  - id: fog_blinds_laser\n    enabled: true\n")
    assert "fog_blinds_laser" in {r.id for r in session.load_ruleset(site, [extra])}
    assert len(_entries(cache / "rules")) == 2


def test_the_same_file_under_another_name_is_another_entry(cache, tmp_path):
    """Rules remember their file: the name is part of the key."""
    site = load_site(None)
    a, b = tmp_path / "a.yaml", tmp_path / "b.yaml"
    a.write_text(MINE)
    b.write_text(MINE)
    from_a = session.load_ruleset(site, [a])
    from_b = session.load_ruleset(site, [b])
    assert [r.source for r in from_b if r.id == "calm_bonus"] == [str(b)]
    assert [r.source for r in from_a if r.id == "calm_bonus"] == [str(a)]


def test_a_rejected_rule_set_is_never_cached(cache, tmp_path):
    site = load_site(None)
    extra = tmp_path / "bad.yaml"
    extra.write_text(
        "rules:\n  - id: broken\n    applies_to: scan\n    condition: wind_gust_ms >\n    effect: block\n    message: x\n"
    )
    for _ in range(2):
        with pytest.raises(RulesError):
            session.load_ruleset(site, [extra])
    assert _entries(cache / "rules") == []


def _damage(entry: Path, how: str) -> None:
    text = entry.read_text()
    if how == "truncated":
        entry.write_text(text[: len(text) // 2])
    elif how == "garbage":
        entry.write_bytes(b"\x00\xff not json")
    elif how == "edited":  # still JSON, the digest no longer matches
        doc = json.loads(text)
        doc["doc"]["rules" if "rules" in doc["doc"] else "data"] = []
        entry.write_text(json.dumps(doc))
    elif how == "another key":
        doc = json.loads(text)
        doc["key"] = "0" * 40
        entry.write_text(json.dumps(doc))
    elif how == "not a rule set":  # digest recomputed: a well-formed entry of the wrong shape
        body = {"version": stored.VERSION, "rules": [{"id": 3}], "sources": [], "disabled": []}
        doc = json.loads(text)
        doc["doc"] = body
        doc["digest"] = jsoncache._digest(json.dumps(body, allow_nan=False, sort_keys=True))
        entry.write_text(json.dumps(doc))
    elif how == "empty":
        entry.write_text("")


DAMAGES = ["truncated", "garbage", "edited", "another key", "not a rule set", "empty"]


@pytest.mark.parametrize("how", DAMAGES)
def test_a_damaged_rule_set_entry_is_ignored_and_rebuilt(cache, how):
    site = load_site(None)
    first = session.load_ruleset(site)
    (entry,) = _entries(cache / "rules")
    _damage(entry, how)
    assert _fields(session.load_ruleset(site)) == _fields(first)
    assert jsoncache.load("rules", entry.stem) is not None  # written again, whole


def test_the_stored_form_round_trips():
    ruleset = loader.load_rules(session.rule_files(load_site(None)), CATALOGUE)
    doc = json.loads(json.dumps(stored.ruleset_to_dict(ruleset)))
    assert _fields(stored.ruleset_from_dict(doc, CATALOGUE)) == _fields(ruleset)
    with pytest.raises(ValueError):
        stored.ruleset_from_dict(dict(doc, version=stored.VERSION + 1), CATALOGUE)


def test_the_key_covers_the_code_of_the_rule_language():
    assert stored.RULE_SOURCE_MODULES
    assert jsoncache.code_digest(stored.RULE_SOURCE_MODULES) is not None
    assert jsoncache.code_digest(["advisor.rules.no_such_module"]) is None


# --------------------------------------------------------------------------- YAML


def test_yaml_comes_back_from_the_cache_unchanged(cache, monkeypatch, tmp_path):
    path = tmp_path / "doc.yaml"
    path.write_text("site:\n  name: Somewhere\n  latitude_deg: 47.1\n  list: [1, 2.5, 'x', true, null]\n")
    data, lines = yamlcache.load_yaml_cached(path, SiteError)
    assert (data, lines) == yamlio.load_yaml(path, SiteError)

    def no_parsing(*_a, **_k):
        raise AssertionError("parsed again")

    monkeypatch.setattr(yamlcache, "parse_yaml_text", no_parsing)
    assert yamlcache.load_yaml_cached(path, SiteError) == (data, lines)
    assert lines[("site", "list")] == 4
    path.write_text("site:\n  name: Elsewhere\n")  # other bytes: parsed again
    with pytest.raises(AssertionError, match="parsed again"):
        yamlcache.load_yaml_cached(path, SiteError)


def test_the_demo_site_is_the_same_from_the_cache(cache):
    first = load_site(None, read_yaml=yamlcache.load_yaml_cached)
    assert _entries(cache / "yaml")
    assert load_site(None, read_yaml=yamlcache.load_yaml_cached) == first == load_site(None)


@pytest.mark.parametrize("text", ["when: 2026-01-15\n", "x: .nan\n", "3: three\n", "x: .inf\n", "s: !!set {a}\n"])
def test_yaml_that_json_cannot_give_back_is_not_cached(cache, tmp_path, text):
    path = tmp_path / "doc.yaml"
    path.write_text(text)
    first = yamlcache.load_yaml_cached(path, SiteError)
    assert _entries(cache / "yaml") == []
    assert repr(yamlcache.load_yaml_cached(path, SiteError)) == repr(first)


@pytest.mark.parametrize("how", ["truncated", "garbage", "edited", "another key", "empty"])
def test_a_damaged_yaml_entry_is_ignored_and_rebuilt(cache, tmp_path, how):
    path = tmp_path / "doc.yaml"
    path.write_text("a:\n  b: [1, 2]\n")
    first = yamlcache.load_yaml_cached(path, SiteError)
    (entry,) = _entries(cache / "yaml")
    _damage(entry, how)
    assert yamlcache.load_yaml_cached(path, SiteError) == first
    assert jsoncache.load("yaml", entry.stem) is not None


def test_a_bad_site_file_is_refused_the_same_with_a_cache(cache, tmp_path):
    """Errors are never cached: the checks of the file run every time."""
    path = tmp_path / "site.yaml"
    path.write_text("site:\n  name: x\n  name: y\n")
    for _ in range(2):
        with pytest.raises(SiteError, match="given twice"):
            yamlcache.load_yaml_cached(path, SiteError)
    path.write_text("")
    with pytest.raises(SiteError, match="empty"):
        yamlcache.load_yaml_cached(path, SiteError)
    assert _entries(cache / "yaml") == []


def test_an_unwritable_cache_is_skipped(tmp_path, monkeypatch):
    blocker = tmp_path / "file"
    blocker.write_text("not a folder")
    monkeypatch.setenv("ADVISOR_CACHE_DIR", str(blocker))
    site = load_site(None)
    assert len(session.load_ruleset(site)) > 0


def test_is_plain():
    assert jsoncache.is_plain({"a": [1, 2.5, "x", True, None, {"b": -0.0}]})
    for value in (float("nan"), float("inf"), (1, 2), {1: "a"}, {"a": {1, 2}}, b"x"):
        assert not jsoncache.is_plain(value)


# --------------------------------------------------------------------------- the check path


def _run(code: str, cache_dir: Path, *argv: str) -> subprocess.CompletedProcess:
    env = {**os.environ, "PYTHONPATH": str(ROOT), "ADVISOR_CACHE_DIR": str(cache_dir)}
    return subprocess.run(
        [sys.executable, "-c", code, *argv], check=False, capture_output=True, text=True, cwd=ROOT, env=env, timeout=120
    )


CHECK_THEN_MODULES = (
    "import sys, io, contextlib\n"
    "from advisor.commands.main import main\n"
    "out = io.StringIO()\n"
    "with contextlib.redirect_stdout(out):\n"
    "    status = main(sys.argv[1:])\n"
    "print(status)\n"
    "print(repr(out.getvalue()))\n"
    "print(' '.join(sorted(sys.modules)))\n"
)


@pytest.mark.parametrize("argv", [["check"], ["check", "--json"]])
def test_check_keeps_heavy_and_unrelated_modules_off_its_path(tmp_path, argv):
    """The bundled demo ``check``: no scikit-learn, no replay, plan or tick code, no rich when
    stdout is not a terminal, and once its caches are warm neither the YAML reader nor the rule
    lint; its output and status the same cold and warm."""
    runs = []
    for _ in range(2):
        proc = _run(CHECK_THEN_MODULES, tmp_path / "cache", *argv)
        assert proc.returncode == 0, proc.stderr
        status, output, modules = proc.stdout.splitlines()
        runs.append((status, output, set(modules.split())))
    (status_cold, out_cold, mods_cold), (status_warm, out_warm, mods_warm) = runs
    assert (status_cold, out_cold) == (status_warm, out_warm)
    assert status_cold == "0"  # the demo instant is a scan
    never = {"sklearn", "scipy", "rich", "advisor.evaluation.replay", "advisor.evaluation.replay_table"}
    never |= {"advisor.evaluation.plan", "advisor.evaluation.advisory", "advisor.model.training"}
    never |= {"advisor.commands.replay", "advisor.commands.outlook", "advisor.commands.plan", "advisor.io.featurecache"}
    for mods in (mods_cold, mods_warm):
        assert not {m for m in mods if m.split(".")[0] in never or m in never}
    assert {"yaml", "advisor.rules.loader", "advisor.rules.lint"} <= mods_cold
    assert not {m for m in mods_warm if m == "yaml" or m.startswith("yaml.")}
    assert not mods_warm & {"advisor.rules.loader", "advisor.rules.lint", "advisor.rules.thresholds"}


def test_a_warm_cache_gives_byte_identical_output_and_status(tmp_path):
    env = {**os.environ, "PYTHONPATH": str(ROOT), "ADVISOR_CACHE_DIR": str(tmp_path / "cache")}
    outs = []
    for argv in (["check"], ["check"], ["check", "--json"], ["check", "--json"], ["check", "--details"]):
        proc = subprocess.run(
            [sys.executable, "-m", "advisor", *argv],
            check=False,
            capture_output=True,
            cwd=ROOT,
            env=env,
            timeout=120,
        )
        outs.append((proc.returncode, proc.stdout, proc.stderr))
    assert outs[0] == outs[1] and outs[2] == outs[3]
    for entry in _entries(tmp_path / "cache" / "rules") + _entries(tmp_path / "cache" / "yaml"):
        entry.write_text("{damaged")
    proc = subprocess.run(
        [sys.executable, "-m", "advisor", "check"], check=False, capture_output=True, cwd=ROOT, env=env, timeout=120
    )
    assert (proc.returncode, proc.stdout, proc.stderr) == outs[0]
