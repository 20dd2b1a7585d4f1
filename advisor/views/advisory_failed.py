"""The advisory a scheduled run publishes when it could not evaluate: undetermined, saying why.

    files = failed_advisory(change, problem, exit_status, site_name=..., time_utc=..., freq_ghz=...,
                            stale_after_min=...)     # advisory.json, advisory.txt, advisory.html

A run that fails (a site or rule file that cannot be read, an internal error) must not leave
the previous advisory standing: a "scan" published an hour ago would still be read as the
advice.  These pages replace it.  They are built from plain strings only (no rich, no
features), so whatever made the run fail cannot stop them being written; every text is cleaned
of control characters and the page is HTML-escaped.
"""

from __future__ import annotations

import html
import json

from advisor.catalogue import CATALOGUE
from advisor.evaluation.advisory import Change, short_utc
from advisor.text import clean_text, shorten
from advisor.views.context import CAUTIONS
from advisor.views.jsondoc import SCHEMA_VERSION
from advisor.vocabulary import METHODS, VERDICT

#: The reason id of a run that could not evaluate.
FAILED_RULE = "advisor.failed"
HEADLINE = "The advisor could not evaluate this run; the previous advisory is withdrawn. Do not scan on this advice."
REFRESH_S = 60


def failed_advisory(
    change: Change,
    problem: str,
    exit_status: int,
    *,
    site_name: str | None,
    time_utc: str,
    freq_ghz: float | None,
    stale_after_min: float,
) -> dict[str, str]:
    """``advisory.json``, ``advisory.txt`` and ``advisory.html`` of a run that failed with ``problem``.

    ``change`` is the tick's change record for the verdict ``undetermined``; ``time_utc`` the
    evaluation time asked for (``YYYY-MM-DDTHH:MM:SSZ``); ``exit_status`` the run's own.
    """
    problem = shorten(clean_text(problem), 600)
    site = clean_text(site_name) if site_name else None
    reason = {"rule": FAILED_RULE, "applies_to": "both", "effect": "block", "message": problem}
    doc = {
        "schema_version": SCHEMA_VERSION,
        "verdict": "undetermined",
        "headline": HEADLINE,
        "time_utc": time_utc,
        "target_freq_ghz": freq_ghz,
        "site": site,
        "demo_data": False,
        "reasons": [reason],
        "features": {name: None for name in CATALOGUE},
        "calibrator": None,
        "candidates": {
            m: {
                "feasible": False,
                "surface_rms_um": None,
                "ruze_efficiency": None,
                "meets_requirement": None,
                "requirement_margin_um": None,
                "p_usable": None,
                "duration_min": None,
                "blocked_by": [FAILED_RULE],
            }
            for m in METHODS
        },
        "data_quality": {"ok": False, "error": problem},
        "next_window": None,
        "notes": [],
        "cautions": list(CAUTIONS),
        "exit_status": exit_status,
        "issued_utc": change.state.issued_utc,
        "changed_since": change.state.since_utc,
        "previous_verdict": change.previous_verdict,
        "undetermined_ticks": change.state.undetermined_ticks,
        "feed_looks_dead": False,
        "failed": True,
    }
    label = VERDICT["undetermined"].label
    freq = f" · {freq_ghz:g} GHz" if freq_ghz else ""
    issued = (
        f"Issued {short_utc(change.state.issued_utc)} by advisor tick; "
        f"undetermined since {short_utc(change.state.since_utc)}."
    )
    text = "\n".join(
        [
            issued,
            f"advisor · {site or 'site not read'} · {time_utc.replace('T', ' ').replace('Z', ' UTC')}{freq}",
            f"VERDICT: {label} — {HEADLINE}",
            "",
            "Reasons:",
            f"  - block [{FAILED_RULE}, both]: {problem}",
            "",
            "Cautions: " + " ".join(CAUTIONS),
            "",
        ]
    )
    page = _PAGE.format(
        refresh=REFRESH_S,
        title=html.escape(f"{label} · {site or 'advisor'} · advisor"),
        body=html.escape(text),
        issued=html.escape(change.state.issued_utc),
        stale_min=f"{stale_after_min:g}",
    )
    return {
        "advisory.json": json.dumps(doc, indent=2, allow_nan=False) + "\n",
        "advisory.txt": text,
        "advisory.html": page,
    }


_PAGE = """<!DOCTYPE html>
<html lang="en">
<head>
<meta charset="UTF-8">
<meta http-equiv="refresh" content="{refresh}">
<meta name="viewport" content="width=device-width, initial-scale=1">
<title>{title}</title>
<style>
body {{ color: #fff; background-color: #5c0011; margin: 1.2em; }}
pre {{ font: clamp(10px, min(1.5vw, 1.9vh), 28px)/1.2 'DejaVu Sans Mono', Menlo, consolas, monospace;
      white-space: pre-wrap; margin: 0; }}
</style>
</head>
<body data-issued="{issued}" data-stale-min="{stale_min}">
<pre>{body}</pre>
</body>
</html>
"""
