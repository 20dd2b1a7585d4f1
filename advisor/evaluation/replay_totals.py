"""What a replay keeps of each slice: hours per verdict, month and hour, weather, rule changes, attempt rows.

    totals = ReplayTotals(rule_sets, site, attempts)
    totals.add(decisions, times_ns, next_ns)          # one slice (advisor.evaluation.replay_stream)
    totals.hours(0), totals.by_month(), totals.by_local_hour(), totals.dominant()
    totals.weather(), totals.comparison(), totals.scores(0), totals.warnings(registry, covered)

Each row stands for the time to the next row (nothing across a gap), the last row for the median
step, as :func:`advisor.evaluation.replay.step_hours`; the sums are kept in integer nanoseconds
so that they do not depend on where slices end.  The gap limit follows the feed's cadence (the
median of the rows' ``feed_cadence_min``), which is known only at the end: the totals are made
with a guess (the first slice's), and :meth:`ReplayTotals.consistent` says whether it held; if
not, the caller replays again with :meth:`ReplayTotals.measured_gap_limit_min`.  The summaries
are made by the functions a whole-array replay uses (``weather_summary``, ``rule_set_changes``,
``score_attempts``, ``coverage_warnings_from``).  What is kept grows with the number of months,
attempts and rules, never with the number of rows.  Pure.
"""

from __future__ import annotations

from collections.abc import Sequence
from zoneinfo import ZoneInfo

import numpy as np
import pandas as pd

from advisor.decision import Decisions
from advisor.evaluation.replay import (
    Attempts,
    Replayed,
    dominant_verdicts,
    rule_set_change_masks,
    rule_set_changes,
    score_attempts,
    verdict_codes,
    weather_masks,
    weather_summary,
)
from advisor.evaluation.replay_table import coverage_warnings_from
from advisor.io.archive import count_values, median_of_counts
from advisor.io.references import Registry
from advisor.io.site import Site
from advisor.rules.ruleset import RuleEvaluation, RuleSet
from advisor.vocabulary import METHODS, VERDICTS

__all__ = ["NS_PER_HOUR", "ReplayTotals"]

NS_PER_HOUR = 3_600_000_000_000
_NV = len(VERDICTS)


class _Sums:
    """Nanoseconds and rows per key; the final row's keys wait for the median step."""

    def __init__(self) -> None:
        self.ns: dict[tuple, int] = {}
        self.rows: dict[tuple, int] = {}
        self.last: set[tuple] = set()

    def add(self, masks: dict[tuple, np.ndarray], weights_ns: np.ndarray, final: bool) -> None:
        for key, mask in masks.items():
            self.ns[key] = self.ns.get(key, 0) + int(weights_ns[mask].sum())
            self.rows[key] = self.rows.get(key, 0) + int(np.count_nonzero(mask))
            if final and len(mask) and mask[-1]:
                self.last.add(key)

    def hours(self, key: tuple, last_hours: float) -> float:
        return self.ns.get(key, 0) / NS_PER_HOUR + (last_hours if key in self.last else 0.0)

    def has_rows(self, key: tuple) -> bool:
        return self.rows.get(key, 0) > 0


class ReplayTotals:
    """Everything a replay reports, summed slice by slice (see the module's text).

    Parameters
    ----------
    rule_sets : sequence of RuleSet
        The rule sets decided (the first is the replay's own; a second is compared with it).
    site : Site
        Its time zone (local months and hours), wind limit and feed limits.
    attempts : Attempts, optional
        Recorded attempts: the rows in force at each are kept for the scores.
    gap_limit_min : float, optional
        The gap limit to use [min] (a second pass); else the first slice's cadence gives it.
    """

    def __init__(
        self,
        rule_sets: Sequence[RuleSet],
        site: Site,
        attempts: Attempts | None = None,
        gap_limit_min: float | None = None,
    ) -> None:
        self.site = site
        self.zone = ZoneInfo(site.time_zone)
        self.rule_ids = [sorted({r.id for r in rules}) for rules in rule_sets]
        self.applies = [{r.id: r.applies_to for r in rules} for rules in rule_sets]
        self.attempts = attempts
        self.attempt_ns = None if attempts is None else attempts.times_utc.as_unit("ns").asi8
        self.gap_limit_min = gap_limit_min
        self.rows = 0
        self.first_ns: int | None = None
        self.last_ns: int | None = None
        self.steps: dict[int, int] = {}  # step between rows [ns] → count
        self.cadences: dict[float, int] = {}  # feed_cadence_min → rows (NaN left out)
        self.sums = _Sums()
        self.months: dict[int, np.ndarray] = {}  # local year*100+month → ns per (hour, verdict)
        self.month_rows: dict[int, np.ndarray] = {}  # local year*100+month → rows per hour
        self.last_cell: tuple[int, int, int] | None = None
        self.kept: list[list[dict]] = [[] for _ in rule_sets]  # rows in force at attempts, per rule set

    # ---------------------------------------------------------------- adding
    def add(self, decisions: Sequence[Decisions], times_ns: np.ndarray, next_ns: int | None) -> None:
        """Add consecutive rows (one :class:`Decisions` per rule set) at ``times_ns``; ``next_ns``
        is the time of the row after them (None after the last row)."""
        n = len(times_ns)
        if n == 0:
            return
        base = decisions[0]
        cadence = base.features["feed_cadence_min"].to_numpy(dtype=float)
        count_values(self.cadences, cadence[np.isfinite(cadence)])
        if self.gap_limit_min is None:
            self.gap_limit_min = float(self.site.feed.gap_limit_min(self.cadence_min()))
        gap_limit_min = self.gap_limit_min
        final = next_ns is None
        following = np.append(times_ns[1:], times_ns[-1] if next_ns is None else next_ns)
        step = following - times_ns
        count_values(self.steps, step[:-1] if final else step)
        weights = np.where(step / 6e10 <= gap_limit_min, step, 0)
        if final:
            weights[-1] = 0  # the last row's hours come from the median step
        codes = [verdict_codes(d.verdict) for d in decisions]
        masks = self._masks(decisions, codes)
        self.sums.add(masks, weights, final)
        self._add_table(codes[0], times_ns, weights, final)
        if self.attempt_ns is not None and len(self.attempt_ns):
            self._keep_attempt_rows(decisions, times_ns, next_ns)
        if self.first_ns is None:
            self.first_ns = int(times_ns[0])
        self.last_ns = int(times_ns[-1])
        self.rows += n

    def _masks(self, decisions: Sequence[Decisions], codes: list[np.ndarray]) -> dict[tuple, np.ndarray]:
        base = decisions[0]
        features = base.features
        masks: dict[tuple, np.ndarray] = {}
        for k, code in enumerate(codes):
            for i, v in enumerate(VERDICTS):
                masks[("verdict", k, v)] = code == i
        masks[("all",)] = np.ones(len(base.verdict), dtype=bool)
        masks[("no_reference",)] = ~features["has_reference"].to_numpy(dtype=bool)
        if self.attempt_ns is not None and len(self.attempt_ns):
            t = features["time"].to_numpy(dtype="datetime64[ns]").view(np.int64)
            masks[("outside_attempts",)] = (t < self.attempt_ns.min()) | (t > self.attempt_ns.max())
        wind_limit = float(self.site.thresholds.high_frequency_wind_limit_ms)
        masks.update(weather_masks(features, base.verdict, wind_limit))
        if len(decisions) > 1:
            other = decisions[1]
            masks.update(rule_set_change_masks(base.verdict, other.verdict, base.rule_eval, other.rule_eval))
        return masks

    def _add_table(self, code: np.ndarray, times_ns: np.ndarray, weights: np.ndarray, final: bool) -> None:
        local = pd.DatetimeIndex(times_ns.astype("datetime64[ns]")).tz_localize("UTC").tz_convert(self.zone)
        local_ns = local.tz_localize(None).asi8
        months = local_ns.view("datetime64[ns]").astype("datetime64[M]").astype(np.int64)  # since 1970-01
        month = (months // 12 + 1970) * 100 + months % 12 + 1
        hour = (local_ns // NS_PER_HOUR) % 24
        for m in (np.unique(month) if month[0] != month[-1] else month[:1]).tolist():
            rows = month == m
            table = self.months.setdefault(m, np.zeros((24, _NV), dtype=np.int64))
            present = self.month_rows.setdefault(m, np.zeros(24, dtype=np.int64))
            ok = rows & (code >= 0)
            np.add.at(table, (hour[ok], code[ok]), weights[ok])
            np.add.at(present, hour[rows], 1)
        if final and code[-1] >= 0:
            self.last_cell = (int(month[-1]), int(hour[-1]), int(code[-1]))

    def _keep_attempt_rows(self, decisions: Sequence[Decisions], times_ns: np.ndarray, next_ns: int | None) -> None:
        """Keep the rows in force at the attempts that fall from this slice's first row to the next."""
        q = self.attempt_ns
        assert q is not None
        inside = q >= times_ns[0]
        if next_ns is not None:
            inside &= q < next_ns
        if not inside.any():
            return
        rows = np.unique(np.searchsorted(times_ns, q[inside], side="right") - 1)
        for k, d in enumerate(decisions):
            self.kept[k].append(
                {
                    "time": times_ns[rows],
                    "verdict": d.verdict[rows],
                    "feasible": {m: d.candidates[m].feasible[rows] for m in METHODS if m in d.candidates},
                    "fired": {r: f[rows] for r, f in d.rule_eval.fired.items()},
                }
            )

    # ---------------------------------------------------------------- results
    def cadence_min(self) -> float | None:
        """The median of the rows' ``feed_cadence_min`` [min] (NaN left out), as a whole replay takes it."""
        return median_of_counts(self.cadences)

    def measured_gap_limit_min(self) -> float:
        """The gap limit [min] the whole replay's cadence gives."""
        return float(self.site.feed.gap_limit_min(self.cadence_min()))

    def consistent(self) -> bool:
        """Whether the gap limit used from the first slice on is the one the whole replay gives."""
        return self.gap_limit_min is None or self.gap_limit_min == self.measured_gap_limit_min()

    def age_limit_min(self) -> float:
        """How old the replayed call may be at an attempt [min] (the feed's age limit)."""
        return float(self.site.feed.age_limit_min(self.cadence_min()))

    def _last_hours(self) -> float:
        median_ns = median_of_counts(self.steps)
        typical = 1.0 if median_ns is None else median_ns / 6e10
        return typical / 60.0 if self.gap_limit_min is not None and typical <= self.gap_limit_min else 0.0

    def hours_of(self, key: tuple) -> float:
        return self.sums.hours(key, self._last_hours())

    def hours(self, k: int = 0) -> dict[str, float]:
        """Hours per verdict under rule set ``k`` (every verdict a key), rounded to 0.01 h."""
        return {v: round(self.hours_of(("verdict", k, v)), 2) for v in VERDICTS}

    def _month_tables(self) -> dict[str, pd.DataFrame]:
        last = self._last_hours()
        out = {}
        for m in sorted(self.months):
            table = self.months[m] / NS_PER_HOUR
            if self.last_cell is not None and self.last_cell[0] == m:
                table[self.last_cell[1], self.last_cell[2]] += last
            out[f"{m // 100:04d}-{m % 100:02d}"] = pd.DataFrame(
                table, index=pd.Index(range(24), name="key"), columns=list(VERDICTS)
            )
        return out

    def by_month(self) -> pd.DataFrame:
        """Hours per verdict per local month ('YYYY-MM'), as :func:`advisor.evaluation.replay.hours_by`."""
        tables = self._month_tables()
        sums = [t.to_numpy().sum(axis=0) for t in tables.values()]
        index = pd.Index(list(tables), name="key")
        return pd.DataFrame(np.array(sums).reshape(len(tables), _NV), index=index, columns=list(VERDICTS))

    def by_local_hour(self) -> pd.DataFrame:
        """Hours per verdict per local hour of day (hours with rows only)."""
        tables = self._month_tables()
        total = sum((t.to_numpy() for t in tables.values()), np.zeros((24, _NV)))
        present = sum(self.month_rows.values(), np.zeros(24, dtype=np.int64)) > 0
        hours = np.flatnonzero(present).astype(np.int32)
        return pd.DataFrame(total[present], index=pd.Index(hours, name="key"), columns=list(VERDICTS))

    def dominant(self) -> pd.DataFrame:
        """The dominant verdict at each local hour of each month ('' without hours there)."""
        rows = {label: dominant_verdicts(table) for label, table in self._month_tables().items()}
        return pd.DataFrame.from_dict(rows, orient="index", columns=list(range(24)))

    def weather(self) -> dict:
        """As :func:`advisor.evaluation.replay.weather_hours` over every row."""
        keys = [k for k in self.sums.rows if k[0] in ("weather", "not_seen")]
        return weather_summary(self.hours_of, self.sums.has_rows, keys)

    def comparison(self) -> dict:
        """As :func:`advisor.evaluation.replay.compare_rule_sets` of the two rule sets over every row."""
        rule_ids = set(self.rule_ids[0]) | set(self.rule_ids[1])
        return rule_set_changes(self.hours_of, self.sums.has_rows, rule_ids)

    def attempt_rows(self, k: int = 0) -> Replayed:
        """The rows in force at the attempts under rule set ``k``, for ``score_attempts``."""
        parts = self.kept[k]
        if not parts:
            empty = pd.DatetimeIndex(np.zeros(0, dtype="datetime64[ns]")).tz_localize("UTC")
            return Replayed(empty, np.zeros(0, dtype=object), RuleEvaluation({}, {}))
        ns = np.concatenate([p["time"] for p in parts])
        fired_ids = list(dict.fromkeys(r for p in parts for r in p["fired"]))
        none = [np.zeros(len(p["time"]), dtype=bool) for p in parts]
        fired = {r: np.concatenate([p["fired"].get(r, z) for p, z in zip(parts, none, strict=True)]) for r in fired_ids}
        return Replayed(
            pd.DatetimeIndex(ns.astype("datetime64[ns]")).tz_localize("UTC"),
            np.concatenate([p["verdict"] for p in parts]),
            RuleEvaluation(fired, {}),
        )

    def scores(self, k: int = 0) -> dict | None:
        """Both methods scored against the attempts under rule set ``k`` (None without attempts)."""
        if self.attempts is None:
            return None
        rows = self.attempt_rows(k)
        parts = self.kept[k]
        feasible = None
        if parts:
            feasible = {
                m: np.concatenate([p["feasible"][m] for p in parts]) & (rows.verdict != "undetermined")
                for m in parts[0]["feasible"]
            }
        return score_attempts(
            rows.times_utc, rows.verdict, rows.rule_eval, self.attempts, self.age_limit_min(), feasible, self.applies[k]
        )

    def warnings(self, registry: Registry, attempts_covered: int | None) -> list[str]:
        """What the replay cannot speak for (:func:`advisor.evaluation.replay_table.coverage_warnings`)."""
        if self.first_ns is None or self.last_ns is None:
            return []
        return coverage_warnings_from(
            pd.Timestamp(self.first_ns, tz="UTC"),
            pd.Timestamp(self.last_ns, tz="UTC"),
            self.hours_of(("all",)),
            self.hours_of(("no_reference",)),
            self.hours_of(("outside_attempts",)),
            registry,
            self.attempts,
            attempts_covered,
        )
