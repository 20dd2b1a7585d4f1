"""The rule engine as a whole: scalar target features, layering order, and its place in the imports.

No physics is checked here; the feature values are random draws that only exercise the code.
"""

from __future__ import annotations

import ast
from pathlib import Path

import numpy as np
import pytest

from advisor.catalogue import CATALOGUE, FEATURES, TARGET_FEATURES
from advisor.io.bundled import default_rules_dir
from advisor.rules.condition import compile_condition, compile_expression
from advisor.rules.loader import default_rule_files, load_rules, rule_layers

RULES_DIR = Path(__file__).resolve().parent.parent / "advisor" / "rules"


def _random_columns(n: int, seed: int) -> dict[str, np.ndarray]:
    """Every row feature as a column of ``n`` random values (some missing), flags as bools."""
    rng = np.random.default_rng(seed)
    out: dict[str, np.ndarray] = {}
    for spec in FEATURES:
        if spec.scope == "target":
            continue
        if spec.unit == "flag":
            out[spec.name] = rng.random(n) < 0.3
            continue
        lo, hi = (spec.domain or (-50.0, 50.0, ""))[:2]
        lo, hi = max(lo, -100.0), min(hi, lo + 200.0 if np.isfinite(lo) else 100.0)
        values = rng.uniform(lo, hi, n)
        values[rng.random(n) < 0.05] = np.nan
        out[spec.name] = values
    return out


#: Site figures among the target features (the same for both targets).
_SITE = {
    "session_elevation_deg": 50.0,
    "calibrator_min_elevation_deg": 25.0,
    "calibrator_max_elevation_deg": 80.0,
    "sun_avoidance_deg": 30.0,
    "site_height_m": 1000.0,
    "receiver_temp_k": 60.0,
    "reference_pwv_mm": 4.0,
    "reference_system_temp_k": 120.0,
}
#: Two targets: one below and one above the high-frequency threshold of the default rules.
TARGETS = [
    {
        "freq_ghz": 22.0,
        "wavelength_mm": 13.6,
        "required_surface_rms_um": 850.0,
        "beam_fwhm_arcsec": 40.0,
        "hf_wind_limit_ms": 6.0,
        "high_frequency_min_ghz": 70.0,
        "scan_duration_min": 45.0,
        "astronomical_duration_min": 40.0,
        "surface_requirement_fraction": 16.0,
        **_SITE,
    },
    {
        "freq_ghz": 115.0,
        "wavelength_mm": 2.6,
        "required_surface_rms_um": 163.0,
        "beam_fwhm_arcsec": 8.0,
        "hf_wind_limit_ms": 6.0,
        "high_frequency_min_ghz": 70.0,
        "scan_duration_min": 45.0,
        "astronomical_duration_min": 40.0,
        "surface_requirement_fraction": 16.0,
        **_SITE,
    },
]


def test_the_targets_cover_every_target_feature():
    for target in TARGETS:
        assert set(target) == set(TARGET_FEATURES)


@pytest.mark.parametrize("target", TARGETS, ids=lambda t: f"{t['freq_ghz']:g}GHz")
def test_ruleset_with_scalar_target_features_equals_full_columns(default_rules, target):
    n = 500
    rows = _random_columns(n, seed=int(target["freq_ghz"]))
    as_scalars = dict(rows, **target)
    as_columns = dict(rows, **{k: np.full(n, v) for k, v in target.items()})
    got, want = default_rules.evaluate(as_scalars, n), default_rules.evaluate(as_columns, n)
    assert set(got.fired) == set(want.fired) == {r.id for r in default_rules}
    for rid, mask in want.fired.items():
        assert got.fired[rid].shape == (n,) and got.fired[rid].dtype == bool
        np.testing.assert_array_equal(got.fired[rid], mask, err_msg=rid)
    assert set(got.error_um) == set(want.error_um)
    for rid, values in want.error_um.items():
        assert got.error_um[rid].shape == (n,)
        np.testing.assert_array_equal(got.error_um[rid], values, err_msg=rid)


def test_a_rule_reading_target_features_changes_with_the_target(default_rules):
    """The default rules read target features: the scalar path is exercised, not bypassed."""
    read = set().union(*(r.condition.names for r in default_rules))
    assert read & set(TARGET_FEATURES)
    n = 200
    rows = _random_columns(n, seed=3)
    low, high = (default_rules.evaluate(dict(rows, **t), n) for t in TARGETS)
    assert any((low.fired[rid] != high.fired[rid]).any() for rid in low.fired)


def test_scalar_columns_broadcast_and_stay_scalars():
    rule = compile_condition("freq_ghz >= 70 and wind_mean_ms > 4", CATALOGUE)
    wind = np.array([1.0, 5.0, np.nan, 9.0])
    for freq in (115.0, np.float64(115.0), np.array(115.0), 115):
        assert rule.evaluate({"freq_ghz": freq, "wind_mean_ms": wind}).tolist() == [False, True, False, True]
    assert rule.evaluate({"freq_ghz": 22.0, "wind_mean_ms": wind}).tolist() == [False] * 4
    used = rule.values_used({"freq_ghz": 115.0, "wind_mean_ms": wind})
    assert used["freq_ghz"].ndim == 0 and used["wind_mean_ms"].shape == (4,)


def test_only_scalars_need_a_length():
    rule = compile_expression("required_surface_rms_um / 2", CATALOGUE)
    np.testing.assert_array_equal(rule.evaluate({"required_surface_rms_um": 160.0}, length=3), [80.0] * 3)
    assert rule.evaluate({"required_surface_rms_um": 160.0}, length=0).shape == (0,)
    with pytest.raises(ValueError, match="length"):
        rule.evaluate({"required_surface_rms_um": 160.0})
    # another column of the mapping tells the length
    assert rule.evaluate({"required_surface_rms_um": 160.0, "x": np.zeros(2)}).shape == (2,)


def test_scalar_flags_and_missing_scalars():
    fog = compile_condition("fog", CATALOGUE)
    assert fog.evaluate({"fog": True}, length=2).tolist() == [True, True]
    assert fog.evaluate({"fog": np.nan}, length=2).tolist() == [False, False]
    assert compile_condition("missing(fog)", CATALOGUE).evaluate({"fog": np.nan}, length=2).tolist() == [True, True]
    assert compile_condition("missing(fog)", CATALOGUE).evaluate({"fog": False}, length=1).tolist() == [False]
    assert compile_condition("missing(freq_ghz)", CATALOGUE).evaluate({"freq_ghz": None}, length=1).tolist() == [True]


def test_columns_must_be_scalars_or_one_dimensional():
    rule = compile_condition("wind_mean_ms > 4", CATALOGUE)
    with pytest.raises(ValueError, match="one-dimensional or a scalar"):
        rule.evaluate({"wind_mean_ms": np.zeros((2, 2))})
    with pytest.raises(ValueError, match="expected 3"):
        compile_condition("wind_mean_ms > hf_wind_limit_ms", CATALOGUE).evaluate(
            {"wind_mean_ms": np.zeros(2), "hf_wind_limit_ms": 6.0}, length=3
        )


def test_rule_layers_are_defaults_then_site_then_command_line(tmp_path):
    site_file, extra = tmp_path / "site_rules.yaml", tmp_path / "mine.yaml"
    files = rule_layers(site_files=[site_file], extra=[str(extra)])
    defaults = default_rule_files()
    assert defaults and all(p.parent == default_rules_dir() for p in defaults)
    assert files == [(p, "default") for p in defaults] + [(site_file, "site"), (extra, "command line")]
    assert rule_layers() == [(p, "default") for p in defaults]


def test_default_rules_load_from_the_bundled_folder():
    ruleset = load_rules(rule_layers(), CATALOGUE)
    assert len(ruleset) > 0 and {r.layer for r in ruleset} == {"default"}
    assert {Path(s).parent for s in ruleset.sources} == {default_rules_dir()}


# --------------------------------------------------------------------------- imports


def _imports(path: Path) -> set[str]:
    out = set()
    for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
        if isinstance(node, ast.ImportFrom) and node.module and node.module.startswith("advisor"):
            out.add(node.module)
        elif isinstance(node, ast.Import):
            out.update(a.name for a in node.names if a.name.startswith("advisor"))
    return out


def test_the_rule_engine_imports_only_base_modules_and_bundled_data():
    allowed = {
        "advisor",
        "advisor.errors",
        "advisor.units",
        "advisor.vocabulary",
        "advisor.catalogue",
        "advisor.text",
        "advisor.io.yamlio",
        "advisor.io.fileio",
        "advisor.io.bundled",
        "advisor.io.jsoncache",
    }
    for path in sorted(RULES_DIR.glob("*.py")):
        for module in _imports(path):
            assert module in allowed or module.startswith("advisor.rules."), f"{path.name} imports {module}"


def test_the_rule_engine_has_no_import_cycle():
    graph = {
        f"advisor.rules.{p.stem}": {m for m in _imports(p) if m.startswith("advisor.rules.")}
        for p in RULES_DIR.glob("*.py")
    }
    done: set[str] = set()

    def visit(module: str, path: tuple[str, ...]) -> None:
        assert module not in path, " → ".join(path + (module,))
        if module in done:
            return
        for dep in graph.get(module, ()):
            visit(dep, path + (module,))
        done.add(module)

    for module in graph:
        visit(module, ())
    assert len(done) == len(graph) >= 10
