"""The one evaluation path shared by check, outlook and replay: frame → features → rules → decision.

Pure: takes already-loaded objects, returns :class:`advisor.decision.Decisions`.  The caller
chooses the rows of the feed that may be used and the evaluation times.
"""

from __future__ import annotations

from typing import Callable, Mapping, Sequence

import numpy as np
import pandas as pd

from advisor.decision import Decisions, decide
from advisor.features import compute_features, columns_of
from advisor.io.references import Registry
from advisor.rules.ruleset import RuleSet
from advisor.io.site import Site

OddsFunction = Callable[[pd.DataFrame], Mapping[str, np.ndarray]]


def evaluate(frame: pd.DataFrame, times_utc, site: Site, registry: Registry, rules: RuleSet,
             freq_ghz: float, odds: OddsFunction | None = None) -> Decisions:
    """Decisions at every time in ``times_utc`` from the canonical ``frame``."""
    return evaluate_rule_sets(frame, times_utc, site, registry, [rules], freq_ghz, odds)[0]


def evaluate_rule_sets(frame: pd.DataFrame, times_utc, site: Site, registry: Registry,
                       rule_sets: Sequence[RuleSet], freq_ghz: float,
                       odds: OddsFunction | None = None) -> list[Decisions]:
    """Decisions under each rule set, from features (and model odds) computed once."""
    features = compute_features(frame, times_utc, site, registry, freq_ghz)
    columns = columns_of(features)
    p_usable = odds(features) if odds else None
    return [decide(features, rules.evaluate(columns, len(features)), rules, site, p_usable) for rules in rule_sets]
