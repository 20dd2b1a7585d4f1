"""A cache of an archive's features between replays: the rules change, the weather does not.

Staff replay the same season again and again while they tune rules.  The features of every
archive row (sun, moisture, wind windows, reference, calibrators) do not depend on the rules, so
``advisor replay`` keeps them in ``$ADVISOR_CACHE_DIR`` (default ``$XDG_CACHE_HOME/advisor`` or
``~/.cache/advisor``), keyed by a hash of everything they are computed from:

* the bytes of the archive, the site file and the reference registry;
* the replayed period and the feed layout;
* the features' version and the source of every module that computes them (the caller passes
  both: :data:`advisor.features.FEATURES_VERSION`, :func:`advisor.features.feature_source_paths`).

The row features do not depend on the target frequency, so one entry serves every frequency.

A change to any of these gives a new key, so an entry is never stale. Entries are plain
``.npz`` arrays (no pickle), written atomically; a damaged entry is removed and recomputed.
Only the newest :data:`MAX_ENTRIES` are kept.
"""

from __future__ import annotations

import contextlib
import hashlib
import json
import os
import zipfile
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

MAX_ENTRIES = 3


def cache_dir() -> Path:
    """Where entries live (created on first store)."""
    if os.environ.get("ADVISOR_CACHE_DIR"):
        return Path(os.environ["ADVISOR_CACHE_DIR"])
    base = Path(os.environ.get("XDG_CACHE_HOME") or Path.home() / ".cache")
    return base / "advisor" / "replay"


def _hash_file(digest, path: Path | None) -> None:
    if path is None or not Path(path).exists():
        digest.update(b"<none>")
        return
    with Path(path).open("rb") as fh:
        for block in iter(lambda: fh.read(1 << 22), b""):
            digest.update(block)


def key_for(
    feed_path: Path,
    site_path: Path | None,
    registry_path: Path | None,
    settings: dict,
    code_paths=(),
    features_version: int = 0,
) -> str:
    """The cache key of one replay's features: inputs, settings, feature code and its version."""
    digest = hashlib.blake2b(digest_size=20)
    for path in (feed_path, site_path, registry_path):
        _hash_file(digest, path)
        digest.update(b"\0")
    for path in code_paths:
        _hash_file(digest, Path(path))
        digest.update(b"\0")
    digest.update(json.dumps({"features_version": features_version, **settings}, sort_keys=True, default=str).encode())
    return digest.hexdigest()


def load(key: str) -> pd.DataFrame | None:
    """The cached features for ``key``, or None (missing or damaged: a damaged entry is removed)."""
    path = cache_dir() / f"{key}.npz"
    if not path.exists():
        return None
    try:
        with np.load(path, allow_pickle=False) as data:
            columns: dict[str, Any] = {
                "time": pd.DatetimeIndex(data["time"].astype("datetime64[ns]")).tz_localize("UTC")
            }
            names = [str(n) for n in data["__columns__"]]
            for name in names:
                columns[name] = data[name]
            columns["calibrator_name"] = pd.Categorical.from_codes(
                data["__calibrator_codes__"], categories=pd.Index([str(c) for c in data["__calibrator_names__"]])
            )
        os.utime(path)  # most recently used
        return pd.DataFrame(columns)
    except (OSError, ValueError, KeyError, zipfile.BadZipFile, EOFError):
        path.unlink(missing_ok=True)
        return None


def store(key: str, features: pd.DataFrame) -> None:
    """Keep ``features`` under ``key`` (atomically); failures to write are silently skipped."""
    folder = cache_dir()
    try:
        folder.mkdir(parents=True, exist_ok=True)
        names = [c for c in features.columns if c not in ("time", "calibrator_name")]
        arrays: dict[str, Any] = {name: features[name].to_numpy() for name in names}
        cal = pd.Categorical(features["calibrator_name"])
        arrays.update(
            {
                "time": pd.DatetimeIndex(features["time"]).tz_convert("UTC").tz_localize(None).as_unit("ns").asi8,
                "__columns__": np.array(names),
                "__calibrator_codes__": cal.codes.astype(np.int16),
                "__calibrator_names__": np.array([str(c) for c in cal.categories]),
            }
        )
        tmp = folder / f".{key}.{os.getpid()}.tmp.npz"
        np.savez(tmp, **arrays)
        os.replace(tmp, folder / f"{key}.npz")
        entries = sorted(folder.glob("*.npz"), key=lambda p: p.stat().st_mtime, reverse=True)
        for old in entries[MAX_ENTRIES:]:
            old.unlink(missing_ok=True)
    except OSError:
        with contextlib.suppress(OSError, NameError):
            tmp.unlink(missing_ok=True)
