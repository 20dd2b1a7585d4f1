"""The one evaluation path: frame → features → rules (+ model odds) → decisions.

    scenario = Scenario(site, registry, rules, freq_ghz, odds)
    decisions = scenario.evaluate(frame, times_utc)           # check, outlook, tick, training
    rows = scenario.row_features(frame, times_utc)            # what a replay caches
    decisions_a, decisions_b = scenario.decide(rows, [rules_a, rules_b])

``check`` (one instant), ``outlook`` (a forecast), ``replay`` (an archive, also comparing two
rule sets), ``rules explain`` and ``tick`` all go through :meth:`Scenario.decide`: row
features (independent of the target) + target features (scalars) → rule masks → model odds →
:func:`advisor.decision.decide`.  Pure: the caller chooses the feed rows that may be used and
the evaluation times.
"""

from __future__ import annotations

from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass, replace

import numpy as np
import pandas as pd

from advisor.decision import Decisions, decide
from advisor.features import columns_of, row_features, target_features, with_target
from advisor.io.references import Registry
from advisor.io.site import Site
from advisor.rules.ruleset import RuleSet

__all__ = ["OddsFunction", "Scenario", "evaluate", "evaluate_rule_sets"]

#: The site model's seam: features → method → probability of a usable result per row.
OddsFunction = Callable[[pd.DataFrame], Mapping[str, np.ndarray]]


@dataclass(frozen=True)
class Scenario:
    """What a call is made for: the site, its reference registry, the rules, the target and the model.

    Parameters
    ----------
    site : Site
    registry : Registry
        Reference scans; the newest at or before each time is in force.
    rules : RuleSet
        The effective rules after layering.
    freq_ghz : float
        Target observing frequency [GHz].
    odds : callable, optional
        The site model's odds (``SiteModel.odds``); None for rules and error budget only.
    """

    site: Site
    registry: Registry
    rules: RuleSet
    freq_ghz: float
    odds: OddsFunction | None = None

    def with_rules(self, rules: RuleSet) -> Scenario:
        """The same scenario under another rule set."""
        return replace(self, rules=rules)

    @property
    def targets(self) -> dict[str, float]:
        """The target-scope features (scalars)."""
        return target_features(self.site, self.freq_ghz)

    def row_features(self, frame: pd.DataFrame, times_utc) -> pd.DataFrame:
        """Row features at ``times_utc`` from the canonical ``frame`` (independent of the target)."""
        return row_features(frame, times_utc, self.site, self.registry)

    def decide(self, rows: pd.DataFrame, rule_sets: Sequence[RuleSet] | None = None) -> list[Decisions]:
        """Decisions on already computed row features, under each rule set (default: the scenario's).

        The target features, the model's odds and the feature columns are built once and serve
        every rule set.
        """
        targets = self.targets
        features = with_target(rows, targets)
        columns = columns_of(features, targets)
        p_usable = self.odds(features) if self.odds else None
        n = len(features)
        return [
            decide(features, targets, rules.evaluate(columns, n), rules, self.site, p_usable)
            for rules in (rule_sets if rule_sets is not None else [self.rules])
        ]

    def evaluate(self, frame: pd.DataFrame, times_utc) -> Decisions:
        """Decisions at every time of ``times_utc`` from the canonical ``frame``."""
        return self.decide(self.row_features(frame, times_utc))[0]


def evaluate(
    frame: pd.DataFrame,
    times_utc,
    site: Site,
    registry: Registry,
    rules: RuleSet,
    freq_ghz: float,
    odds: OddsFunction | None = None,
) -> Decisions:
    """Decisions at every time in ``times_utc`` (shorthand for ``Scenario(...).evaluate``)."""
    return Scenario(site, registry, rules, freq_ghz, odds).evaluate(frame, times_utc)


def evaluate_rule_sets(
    frame: pd.DataFrame,
    times_utc,
    site: Site,
    registry: Registry,
    rule_sets: Sequence[RuleSet],
    freq_ghz: float,
    odds: OddsFunction | None = None,
) -> list[Decisions]:
    """Decisions under each rule set, from features (and model odds) computed once."""
    scenario = Scenario(site, registry, rule_sets[0], freq_ghz, odds)
    return scenario.decide(scenario.row_features(frame, times_utc), rule_sets)
