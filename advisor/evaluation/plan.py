"""Plan the session: which correction to make when, and when to make it again.

    plan = compute_plan(frame, start_utc, hours, site, registry, rules, freq_ghz, odds=None, source="<feed>")

Over a grid of :data:`PLAN_STEP_MIN` steps (the forecast's own spacing when coarser) the
session is evaluated through the one evaluation path (:class:`advisor.evaluation.evaluate.Scenario`)
on the rows an outlook uses: observations, then forecast rows after them, pulled towards the
latest observation where it is worse (:mod:`advisor.evaluation.forecastcheck`) and made more
pessimistic by the site's margins.  At each step each method is feasible or not, and would
leave its expected surface with its odds of success.

Observing a step earns the square of its efficiency (integration time to a given sensitivity
scales as 1/η²): Ruze for the surface, which decays after a correction as the structure's
temperature moves (:mod:`advisor.evaluation.decay`), times the pointing loss in the wind
(Gaussian beam), divided by the atmosphere's integration-time factor at the session's elevation
(``integration_time_factor``: (T_sys*/T_sys*_ref)² against the site's dry reference night, so a
step is worth (η / T_sys*)² relative to it; :func:`atmosphere_factor`).  Correcting earns nothing while it lasts; a
correction that fails leaves the surface as it was.  Before the first correction the surface is
the site's ``uncorrected_surface_rms_um`` when it gives one, else nothing observed counts.

:func:`advisor.evaluation.schedule.solve` finds the schedule with the highest expected value;
the same evaluation prices the simple alternatives (each method now and never again, waiting for
a method that is blocked now, no correction).  Views: :mod:`advisor.views.plan_text`,
:mod:`advisor.views.plan_svg`, :mod:`advisor.views.plan_data`.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from zoneinfo import ZoneInfo

import numpy as np
import pandas as pd

from advisor.errors import FeedError
from advisor.evaluation.decay import first_exceedance, holding_limit_um, structure_temperature_c
from advisor.evaluation.evaluate import OddsFunction, Scenario
from advisor.evaluation.forecastcheck import compare_with_forecast, trust_observation
from advisor.evaluation.outlook import _sun_events, apply_forecast_margins, select_rows, step_grid
from advisor.evaluation.plan_words import ATMOSPHERE_FEATURE, PLAN_LABEL, _headline, _notes, _span_text
from advisor.evaluation.schedule import (
    NO_ACTION,
    Problem,
    evaluate,
    fixed_policy,
    next_action,
    solve,
    state_index,
    success_path,
)
from advisor.io.references import Registry
from advisor.io.site import Site
from advisor.io.times import utc_ns as _ns
from advisor.physics.aperture import pointing_efficiency, ruze_efficiency
from advisor.physics.thermal import drifted_surface_rms_um
from advisor.rules.ruleset import RuleSet
from advisor.vocabulary import METHODS

__all__ = [
    "PLAN_STEP_MIN",
    "MAX_PLAN_HOURS",
    "ATMOSPHERE_FEATURE",
    "PLAN_LABEL",
    "Correction",
    "Alternative",
    "Plan",
    "atmosphere_factor",
    "compute_plan",
]

#: Step of the plan's grid [min] (the forecast's own spacing when that is coarser).
PLAN_STEP_MIN = 10.0
#: Longest session planned [h].
MAX_PLAN_HOURS = 48.0
#: An action must gain at least this much observing at η = 1 to be taken [min].
MIN_GAIN_MIN = 1.0


@dataclass(frozen=True)
class Correction:
    """One correction of the plan (as if every correction succeeds)."""

    method: str
    start_utc: pd.Timestamp
    end_utc: pd.Timestamp
    surface_rms_um: float
    ruze_efficiency: float
    p_usable: float | None
    holds_until_utc: pd.Timestamp | None  # None: holds to the end of the session
    if_fails: tuple[str, pd.Timestamp] | None = None  # the plan's next correction should this one fail


@dataclass(frozen=True)
class Alternative:
    """One way to spend the session, priced like the plan."""

    key: str  # plan | optional | <method>_now | wait_<method> | no_correction
    label: str
    corrections: tuple[tuple[str, pd.Timestamp], ...]
    efficiency: float | None  # √(expected mean of η² over the session); None: not possible
    lost_min: float | None  # expected minutes without useful observing
    expected_corrections: float | None
    path_efficiency: np.ndarray | None = None  # η per step if every correction succeeds (NaN while correcting)
    why_not: str = ""


@dataclass(frozen=True)
class Plan:
    """Everything a plan found, ready to render."""

    site: Site
    freq_ghz: float
    start_utc: pd.Timestamp
    requested_hours: float
    step_min: float
    elevation_deg: float
    required_surface_rms_um: float
    verdict: str  # correct | no_correction | not_possible | undetermined
    headline: str
    corrections: tuple[Correction, ...]
    alternatives: tuple[Alternative, ...]  # the plan first
    steps: pd.DataFrame
    sun_events: pd.DataFrame
    notes: tuple[str, ...] = field(default_factory=tuple)

    @property
    def end_utc(self) -> pd.Timestamp:
        return self.steps["time"].iloc[-1] + pd.Timedelta(minutes=self.step_min)


def _utc(ns) -> pd.DatetimeIndex:
    return pd.DatetimeIndex(np.asarray(ns, dtype=np.int64).astype("datetime64[ns]")).tz_localize("UTC")


def atmosphere_factor(features: pd.DataFrame) -> np.ndarray | None:
    """The weight the atmosphere gives each step's η², or None when the features do not carry it.

    1 / ``integration_time_factor``: the integration time to a given sensitivity scales as
    (T_sys*/η)², so a step under a sky that needs k times the integration time of the site's dry
    reference night is worth η²/k (ITU-R P.676 opacity, T_sys* referred to above the atmosphere;
    :mod:`advisor.physics.atmosphere`).  A missing factor (no humidity, say) counts as the reference.
    """
    if ATMOSPHERE_FEATURE not in features:
        return None
    factor = features[ATMOSPHERE_FEATURE].to_numpy(dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(np.isfinite(factor) & (factor > 0), 1.0 / factor, 1.0)


def _plan_grid(used: pd.DataFrame, start_utc: pd.Timestamp, hours: float, source: str):
    """Regular steps of PLAN_STEP_MIN from the start (the forecast's own grid when coarser)."""
    times, spacing_min = step_grid(used, start_utc, hours, source)  # raises when nothing lies ahead
    if spacing_min > PLAN_STEP_MIN:
        return times, spacing_min
    s = int(_ns(pd.DatetimeIndex([start_utc]))[0])
    step = int(PLAN_STEP_MIN * 6e10)
    last = int(_ns(used["time"]).max())
    limit = min(s + int(round(hours * 3.6e12)), last + int(spacing_min * 6e10))
    grid = np.arange(s, limit, step, dtype=np.int64)
    if len(grid) == 0:
        raise FeedError(
            f"no rows to plan on after {start_utc:%Y-%m-%dT%H:%MZ}",
            source=source,
            hint="pass --start inside the forecast",
        )
    return _utc(grid), PLAN_STEP_MIN


def _runs_ok(feasible: np.ndarray, length: int) -> np.ndarray:
    """Start steps from which ``feasible`` holds for ``length`` steps within the grid."""
    n = len(feasible)
    bad = np.concatenate(([0], np.cumsum(~feasible)))
    ok = np.zeros(n, dtype=bool)
    if length <= n:
        ok[: n - length + 1] = (bad[length:] - bad[: n - length + 1]) == 0
    return ok


def compute_plan(
    frame: pd.DataFrame,
    start_utc: pd.Timestamp,
    hours: float,
    site: Site,
    registry: Registry,
    rules: RuleSet,
    freq_ghz: float,
    odds: OddsFunction | None = None,
    source: str = "<feed>",
) -> Plan:
    """The best schedule of corrections for a session and the simple alternatives to it (pure)."""
    start_utc = pd.Timestamp(start_utc).tz_convert("UTC")
    fs = site.forecast
    elevation = float(site.session.elevation_deg)
    disagreement = compare_with_forecast(frame, site)
    used, hindsight = select_rows(frame, start_utc)
    times, step_min = _plan_grid(used, start_utc, hours, source)
    used = apply_forecast_margins(trust_observation(used, disagreement), fs.wind_margin_pct, fs.dew_point_margin_c)
    decisions = Scenario(site, registry, rules, freq_ghz, odds).evaluate(used, times)
    f, targets = decisions.features, decisions.targets
    n, t_ns = len(times), _ns(times)
    step_ns = int(round(step_min * 6e10))

    last_any = np.searchsorted(_ns(used["time"]), t_ns, side="right") - 1
    row_ns = _ns(used["time"])
    gap = (last_any < 0) | (t_ns - row_ns[np.clip(last_any, 0, None)] >= max(step_ns, int(15 * 6e10)))
    usable = f["data_ok"].to_numpy(dtype=bool) & ~gap
    pointing = np.nan_to_num(
        np.asarray(
            pointing_efficiency(f["wind_pointing_error_arcsec"].to_numpy(dtype=float), targets["beam_fwhm_arcsec"]),
            dtype=float,
        )
    )
    atmosphere = atmosphere_factor(f)
    weight = np.where(usable, pointing**2 * (1.0 if atmosphere is None else atmosphere), 0.0)

    durations = np.array([site.scan.duration_min, site.astronomical.duration_min])
    ends_ns = t_ns[None, :] + np.round(durations * 6e10).astype(np.int64)[:, None]  # (M, n)
    t_struct_all = structure_temperature_c(used, _utc(np.concatenate([t_ns, ends_ns.ravel()])), site)
    t_struct, t_struct_end = t_struct_all[:n], t_struct_all[n:].reshape(len(METHODS), n)
    k_drift = site.structure.drift_um_per_c

    steps_of = np.ceil(durations / step_min - 1e-9).astype(np.int64)
    tail = steps_of - durations / step_min
    S = 1 + len(METHODS) * (n + 1)
    gain = np.zeros((S, n))
    uncorrected = site.astronomical.uncorrected_surface_rms_um
    if uncorrected is not None:
        gain[0] = weight * ruze_efficiency(uncorrected, freq_ghz) ** 2
    start_ok = np.zeros((len(METHODS), n), dtype=bool)
    sigma0 = np.full((len(METHODS), n), np.nan)
    p_success = np.ones((len(METHODS), n))
    for m, method in enumerate(METHODS):  # two methods
        c = decisions.candidates[method]
        start_ok[m] = _runs_ok(c.feasible & usable, int(steps_of[m])) & np.isfinite(t_struct_end[m])
        sigma0[m] = c.surface_rms_um
        # where the model cannot give odds (features missing after a gap) its median odds over the session
        known = c.p_usable[np.isfinite(c.p_usable) & usable]
        p_success[m] = np.where(np.isfinite(c.p_usable), c.p_usable, float(np.median(known)) if len(known) else 1.0)
        j = np.flatnonzero(start_ok[m])
        if len(j) == 0:
            continue
        change = t_struct[None, :] - t_struct_end[m, j][:, None]  # (starts, n)
        sigma = drifted_surface_rms_um(sigma0[m, j][:, None], k_drift, np.nan_to_num(change))
        rows = weight[None, :] * np.asarray(ruze_efficiency(sigma, freq_ghz)) ** 2
        end = j + steps_of[m]
        rows[np.arange(n)[None, :] < (end - 1)[:, None]] = 0.0  # before the correction
        gain[state_index(m, 0, n) + end] = rows

    # a step observed below the site's minimum efficiency is not worth observing: it counts as lost
    problem = Problem(
        gain,
        start_ok,
        p_success,
        steps_of,
        tail,
        min_gain=MIN_GAIN_MIN / (n * step_min),
        lost_below=site.thresholds.min_ruze_efficiency**2,
    )
    policy = solve(problem)
    actions, states = success_path(problem, policy)
    uncorrected_known = uncorrected is not None
    verdict = _verdict(decisions.verdict, usable, start_ok, actions)

    def price(key: str, label: str, chosen: list[tuple[int, int]], pol: np.ndarray | None) -> Alternative:
        pol = fixed_policy(problem, chosen) if pol is None else pol
        outcome = evaluate(problem, pol)
        path_actions, path_states = success_path(problem, pol)
        return Alternative(
            key,
            label,
            tuple((METHODS[m], times[i]) for i, m in path_actions),
            float(np.sqrt(max(outcome.value, 0.0))),
            outcome.lost_steps * step_min,
            outcome.corrections,
            _path_efficiency(gain, path_states, usable),
        )

    tz = ZoneInfo(site.time_zone)
    if verdict == "no_correction":
        # the requirement is met without a correction; the best schedule is still priced, as an option
        alternatives = [price("plan", "the plan (no correction needed)", [], np.full_like(policy, NO_ACTION))]
        if actions:
            alternatives.append(price("optional", "optional: the best schedule", [], policy))
        actions, states = [], np.zeros(n, dtype=np.int64)
    else:
        alternatives = [price("plan", "the plan", [], policy)]
    for m, method in enumerate(METHODS):
        label = PLAN_LABEL[method]
        if start_ok[m, 0]:
            alternatives.append(price(f"{method}_now", f"{label} now, never again", [(0, m)], None))
        else:
            why = ", ".join(decisions.blocked_by(method, 0)) or (
                "no usable weather" if not usable[0] else "not feasible for its whole duration"
            )
            alternatives.append(
                Alternative(f"{method}_now", f"{label} now, never again", (), None, None, None, why_not=why)
            )
            later = np.flatnonzero(start_ok[m])
            if len(later):
                first = int(later.min())
                alternatives.append(
                    price(
                        f"wait_{method}",
                        f"wait {_span_text((t_ns[first] - t_ns[0]) / 6e10)} "
                        f"for {label} ({times[first].tz_convert(tz):%H:%M}), never again",
                        [(first, m)],
                        None,
                    )
                )
    if uncorrected_known and verdict != "no_correction":
        alternatives.append(price("no_correction", "no correction", [], np.full_like(policy, NO_ACTION)))

    planned: list[Correction] = []
    state = 0
    for i, m in actions:  # a few corrections
        end = i + int(problem.steps[m])
        fallback = next_action(problem, policy, end, state) if end < n and problem.p_success[m, i] < 1.0 else None
        planned.append(
            _correction(
                problem,
                decisions,
                times,
                t_struct,
                t_struct_end,
                i,
                m,
                site,
                targets,
                None if fallback is None else (METHODS[fallback[1]], times[fallback[0]]),
            )
        )
        state = state_index(m, end, n)
    corrections = tuple(planned)
    steps = _steps_frame(times, decisions, usable, gap, start_ok, states, gain, t_struct, pointing, f)
    notes = _notes(
        disagreement,
        fs,
        used,
        hindsight,
        start_utc,
        n,
        step_min,
        hours,
        usable,
        atmosphere,
        odds,
        uncorrected_known,
        elevation,
    )
    headline = _headline(verdict, corrections, alternatives, decisions, targets, site, times, usable, start_ok, tz)
    return Plan(
        site=site,
        freq_ghz=float(freq_ghz),
        start_utc=times[0],
        requested_hours=float(hours),
        step_min=float(step_min),
        elevation_deg=elevation,
        required_surface_rms_um=targets["required_surface_rms_um"],
        verdict=verdict,
        headline=headline,
        corrections=corrections,
        alternatives=tuple(alternatives),
        steps=steps,
        sun_events=_sun_events(times, f["sun_elevation_deg"].to_numpy(), step_min),
        notes=tuple(notes),
    )


def _verdict(verdicts: np.ndarray, usable: np.ndarray, start_ok: np.ndarray, actions: list) -> str:
    if not usable.any():
        return "undetermined"
    if (verdicts[usable] == "no_correction").all():
        return "no_correction"
    if actions:
        return "correct"
    return "not_possible"


def _path_efficiency(gain: np.ndarray, states: np.ndarray, usable: np.ndarray) -> np.ndarray:
    """η per step along a path: √gain of its state; NaN while correcting or without usable weather."""
    idx = np.clip(states, 0, None)
    eta = np.sqrt(gain[idx, np.arange(len(states))])
    return np.where((states >= 0) & usable, eta, np.nan)


def _correction(
    problem: Problem, decisions, times, t_struct, t_struct_end, i: int, m: int, site: Site, targets, if_fails
) -> Correction:
    method = METHODS[m]
    c = decisions.candidates[method]
    sigma0 = float(c.surface_rms_um[i])
    end = i + int(problem.steps[m])
    limit = holding_limit_um(
        sigma0, targets["freq_ghz"], targets["required_surface_rms_um"], site.structure.max_efficiency_loss
    )
    after = t_struct[end:] - t_struct_end[m, i]
    k = int(first_exceedance(after[None, :], sigma0, limit, site.structure.drift_um_per_c)[0]) if len(after) else 0
    holds = None if k >= len(after) else times[end + k]
    p = float(problem.p_success[m, i]) if np.isfinite(c.p_usable).any() else None
    return Correction(
        method,
        times[i],
        times[i] + pd.Timedelta(minutes=c.duration_min),
        sigma0,
        float(c.ruze_efficiency[i]),
        p,
        holds,
        if_fails,
    )


def _steps_frame(times, decisions, usable, gap, start_ok, states, gain, t_struct, pointing, f) -> pd.DataFrame:
    n = len(times)
    activity = np.where(states >= 0, "observe", "").astype(object)
    for m, method in enumerate(METHODS):
        activity[states == -1 - m] = method
    activity[~usable & (states >= 0)] = "unknown"
    frame = pd.DataFrame(
        {
            "time": times,
            "verdict": decisions.verdict,
            "usable": usable,
            "gap": gap,
            "activity": activity,
            "efficiency": _path_efficiency(gain, states, usable),
            "structure_temp_c": t_struct,
            "pointing_efficiency": np.where(usable, pointing, np.nan),
        }
    )
    for m, method in enumerate(METHODS):
        frame[f"{method}_can_start"] = start_ok[m]
        frame[f"{method}_surface_rms_um"] = decisions.candidates[method].surface_rms_um
    for name in ("air_temp_c", "solar_wm2", "wind_mean_ms", "wind_gust_ms", "sun_elevation_deg"):
        frame[name] = f[name].to_numpy(dtype=float)
    assert len(frame) == n
    return frame
