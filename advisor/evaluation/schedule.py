"""The search behind ``plan``: which correction to start at which step, on arrays alone.

    problem = Problem(gain, start_ok, p_success, steps, tail)
    policy = solve(problem)                          # dynamic programming, backwards over the steps
    outcome = evaluate(problem, policy)              # expected value, time lost, corrections
    actions, states = success_path(problem, policy)  # the schedule if every correction succeeds
    policy = fixed_policy(problem, [(step, method)]) # a simple alternative, evaluated the same way

The session is a grid of ``n`` steps.  The surface is in one **state** at a time: state 0 is "no
fresh correction", state ``1 + m·(n+1) + c`` is "corrected by method ``m``, the correction ended
at step boundary ``c``".  Observing one step in state ``s`` earns ``gain[s, i]`` (the squared
efficiency at that step: integration time to a given sensitivity scales as 1/η²).  Starting
method ``m`` at step ``i`` takes ``steps[m]`` steps with nothing observed except the last
``tail[m]`` fraction of the last one; it succeeds with probability ``p_success[m, i]`` (then the
state becomes the new correction), otherwise the surface stays as it was.

The value of a policy is the expected mean of the gains over the ``n`` steps; its square root is
the session's effective efficiency (the constant efficiency that would give the same
sensitivity).  :func:`solve` maximises it exactly over every schedule on the grid (Bellman's
backward induction: small loop over steps, vectorised over states); an action is taken only when
it gains more than ``min_gain`` (a minute of perfect observing, so a plan never re-corrects for
nothing).

References
----------
Bellman, R. (1957). *Dynamic Programming*, Princeton University Press (backward induction).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

__all__ = [
    "NO_ACTION",
    "Problem",
    "Outcome",
    "state_index",
    "solve",
    "evaluate",
    "success_path",
    "next_action",
    "fixed_policy",
]

#: Policy entry: keep observing.
NO_ACTION = -1


def state_index(method: int, end_step: int, n: int) -> int:
    """Index of the state "corrected by ``method``, ending at step boundary ``end_step``" (0..n)."""
    return 1 + method * (n + 1) + end_step


@dataclass(frozen=True)
class Problem:
    """A session on a grid of ``n`` steps (see the module docstring).

    gain : (S, n) array, S = 1 + M·(n+1)
        Value of observing step i in state s (η² × weights; 0 where nothing useful is observed).
    start_ok : (M, n) bool array
        Method m can start at step i (feasible through its whole duration, ends within the session).
    p_success : (M, n) array
        Odds that a correction started at step i succeeds.
    steps : (M,) int array
        Steps a correction occupies (its duration rounded up to whole steps).
    tail : (M,) array
        Fraction of its last step left for observing (steps − duration/step).
    min_gain : float
        Least gain in value for which an action is taken.
    lost_below : float
        A step observed with a gain at or below this counts as lost time (not worth observing).
    """

    gain: np.ndarray
    start_ok: np.ndarray
    p_success: np.ndarray
    steps: np.ndarray
    tail: np.ndarray
    min_gain: float = 0.0
    lost_below: float = 0.0

    @property
    def n(self) -> int:
        return int(self.gain.shape[1])

    @property
    def methods(self) -> int:
        return int(self.start_ok.shape[0])


@dataclass(frozen=True)
class Outcome:
    """Expected figures of a policy."""

    value: float  # expected mean of the gains over the session
    lost_steps: float  # expected steps without useful observing (correcting, or gain <= lost_below)
    corrections: float  # expected number of corrections started


def _target(problem: Problem, m: int, i: int) -> tuple[int, int]:
    end = i + int(problem.steps[m])
    return end, state_index(m, end, problem.n)


def solve(problem: Problem) -> np.ndarray:
    """The optimal policy: (n, S) array of the method to start (or NO_ACTION) per step and state."""
    n, S = problem.n, problem.gain.shape[0]
    g = problem.gain / n
    value = np.zeros((n + 1, S))
    policy = np.full((n, S), NO_ACTION, dtype=np.int8)
    for i in range(n - 1, -1, -1):  # backwards over steps; every state at once
        best = g[:, i] + value[i + 1]
        for m in range(problem.methods):
            if not problem.start_ok[m, i]:
                continue
            end, target = _target(problem, m, i)
            p, f = float(problem.p_success[m, i]), float(problem.tail[m])
            success = f * g[target, end - 1] + value[end, target]
            failure = f * g[:, end - 1] + value[end]
            option = p * success + (1.0 - p) * failure
            take = option > best + problem.min_gain
            best = np.where(take, option, best)
            policy[i, take] = m
        value[i] = best
    return policy


def evaluate(problem: Problem, policy: np.ndarray, initial_state: int = 0) -> Outcome:
    """Expected value, time lost and corrections of ``policy``, by carrying the state's odds forward."""
    n, S = problem.n, problem.gain.shape[0]
    g = problem.gain / n
    prob = np.zeros((n + 1, S))
    prob[0, initial_state] = 1.0
    value = lost = corrections = 0.0
    for i in range(n):  # forwards over steps; every state at once
        mass = prob[i]
        watch = (policy[i] == NO_ACTION) & (mass > 0)
        value += float(mass[watch] @ g[watch, i])
        lost += float(mass[watch] @ (problem.gain[watch, i] <= problem.lost_below))
        prob[i + 1, watch] += mass[watch]
        for m in range(problem.methods):
            sel = (policy[i] == m) & (mass > 0)
            if not sel.any():
                continue
            end, target = _target(problem, m, i)
            p, f = float(problem.p_success[m, i]), float(problem.tail[m])
            total = float(mass[sel].sum())
            value += p * total * f * g[target, end - 1] + (1.0 - p) * f * float(mass[sel] @ g[sel, end - 1])
            idle_tail = p * total * (problem.gain[target, end - 1] <= problem.lost_below) + (1.0 - p) * float(
                mass[sel] @ (problem.gain[sel, end - 1] <= problem.lost_below)
            )
            lost += total * (int(problem.steps[m]) - f) + f * idle_tail
            corrections += total
            prob[end, target] += p * total
            prob[end, sel] += (1.0 - p) * mass[sel]
    return Outcome(value, lost, corrections)


def success_path(
    problem: Problem, policy: np.ndarray, initial_state: int = 0
) -> tuple[list[tuple[int, int]], np.ndarray]:
    """The schedule when every correction succeeds: ``[(start_step, method)]`` and the state per step.

    A step spent correcting has state -1 - method.
    """
    n = problem.n
    states = np.empty(n, dtype=np.int64)
    actions: list[tuple[int, int]] = []
    i, s = 0, initial_state
    while i < n:  # one pass along the chosen path (few actions)
        m = int(policy[i, s])
        if m == NO_ACTION:
            states[i] = s
            i += 1
            continue
        end, target = _target(problem, m, i)
        actions.append((i, m))
        states[i:end] = -1 - m
        i, s = end, target
    return actions, states


def next_action(problem: Problem, policy: np.ndarray, step: int, state: int) -> tuple[int, int] | None:
    """The first action the policy takes from ``state`` at ``step`` onwards: ``(step, method)`` or None."""
    ahead = policy[step:, state]
    hits = np.flatnonzero(ahead != NO_ACTION)
    return (step + int(hits[0]), int(ahead[hits[0]])) if len(hits) else None


def fixed_policy(problem: Problem, actions: list[tuple[int, int]]) -> np.ndarray:
    """A policy that starts ``method`` at ``step`` whatever the state, for each ``(step, method)``."""
    policy = np.full((problem.n, problem.gain.shape[0]), NO_ACTION, dtype=np.int8)
    for step, method in actions:
        if problem.start_ok[method, step]:
            policy[step, :] = method
    return policy
