"""Which calibrator the astronomical method would use: up for the whole measurement, clear of the Sun.

names = choose_calibrator(times_index, site, out)   # fills the calibrator features of ``out``
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from advisor.catalogue import CATALOGUE, FEATURES, FLAG_NAMES, ROW_FEATURES, FeatureSpec  # noqa: F401 (re-exported)
from advisor.io.site import Site
from advisor.physics.aperture import (
    gravity_residual_um,
)
from advisor.physics.track import source_track, sun_separation_over_deg


def choose_calibrator(times_index: pd.DatetimeIndex, site: Site, out: dict[str, np.ndarray]) -> pd.Categorical[str]:
    """The calibrator for a measurement starting at each time; fills the ``calibrator_*`` columns of ``out``.

    A calibrator is eligible when it stays within the site's [min, max] elevation for the whole
    measurement and never comes closer to the Sun than ``sun_avoidance_deg``.  Among the eligible
    the one whose elevation halfway through is nearest the session's is chosen: holography corrects
    the surface at the calibrator's elevation, the session uses it at its own, and gravity deforms
    the dish in between (``calibrator_gravity_residual_um``).  Returns the names (a categorical
    whose last category, ``""``, means none).
    """
    astro = site.astronomical
    n = len(times_index)
    names = list(dict.fromkeys([c.name for c in site.calibrators] + [""]))
    if not site.calibrators:
        for name in (
            "calibrator_elevation_deg",
            "calibrator_mid_elevation_deg",
            "calibrator_sun_separation_deg",
            "calibrators_sun_closest_deg",
            "calibrator_gravity_residual_um",
        ):
            out[name] = np.full(n, np.nan)
        out["calibrator_minutes_up"] = np.zeros(n)
        out["calibrators_sun_blocked"] = np.zeros(n)
        out["calibrator_available"] = np.zeros(n, dtype=bool)
        return pd.Categorical.from_codes(np.zeros(n, dtype=int), categories=pd.Index([""]))
    name_code = np.array([names.index(c.name) for c in site.calibrators])
    ra = np.array([c.ra_deg for c in site.calibrators])
    dec = np.array([c.dec_deg for c in site.calibrators])
    track = source_track(
        times_index,
        ra,
        dec,
        site.latitude_deg,
        site.longitude_deg,
        astro.duration_min,
        astro.min_calibrator_elevation_deg,
    )
    # float32 separations, compared with a float64 limit (so as float64: the same test as on the
    # float64 result) and picked or reduced before they become float64 (the same numbers)
    sun_sep = sun_separation_over_deg(times_index, ra, dec, astro.duration_min, as_float32=True)
    in_limits = (track.lowest_elevation_deg >= astro.min_calibrator_elevation_deg) & (
        track.highest_elevation_deg <= astro.max_calibrator_elevation_deg
    )
    clear_of_sun = sun_sep >= np.float64(astro.sun_avoidance_deg)
    eligible = in_limits & clear_of_sun
    session_el = site.session.elevation_deg
    best = np.argmin(np.where(eligible, np.abs(track.mid_elevation_deg - session_el), np.inf), axis=1)
    chosen = eligible.any(axis=1)
    rows = np.arange(n)

    def pick(values: np.ndarray, none: float = np.nan) -> np.ndarray:
        return np.where(chosen, values[rows, best].astype(float), none)

    out["calibrator_elevation_deg"] = pick(track.elevation_deg)
    out["calibrator_mid_elevation_deg"] = pick(track.mid_elevation_deg)
    out["calibrator_minutes_up"] = pick(track.minutes_above, 0.0)
    out["calibrator_sun_separation_deg"] = pick(sun_sep)
    out["calibrators_sun_blocked"] = (in_limits & ~clear_of_sun).sum(axis=1).astype(float)
    closest = np.where(in_limits[:, 0], sun_sep[:, 0], np.float32(np.inf))
    for k in range(1, sun_sep.shape[1]):  # one calibrator at a time: a minimum along the short axis is slow
        np.minimum(closest, np.where(in_limits[:, k], sun_sep[:, k], np.float32(np.inf)), out=closest)
    out["calibrators_sun_closest_deg"] = closest.astype(float)
    out["calibrators_sun_closest_deg"][~in_limits.any(axis=1)] = np.nan
    out["calibrator_available"] = chosen
    out["calibrator_gravity_residual_um"] = np.asarray(
        gravity_residual_um(
            out["calibrator_mid_elevation_deg"], session_el, astro.gravity_sin_um, astro.gravity_cos_um
        ),
        dtype=float,
    )
    return pd.Categorical.from_codes(np.where(chosen, name_code[best], len(names) - 1), categories=pd.Index(names))
