"""``advisor train`` and ``advisor model show``: fitting and inspecting the site model.

``train`` fits the site model on the site's record of attempts (scikit-learn and the fitting
code are imported only when ``train`` runs), says what it left out and why, writes the model and
prints the site-file line that uses it (``--install`` writes that line, keeping the old model
file).  ``model show`` prints what a model file was trained on, its metrics and coefficients in
plain units, and with ``--svg`` draws its reliability and each term's effect.  Which model
``check`` uses is decided in :func:`advisor.commands.session.model_for`.
"""

from __future__ import annotations

import argparse
import datetime as dt
import os
import sys
from pathlib import Path

import numpy as np

from advisor.catalogue import CATALOGUE, unit_text
from advisor.commands import session
from advisor.errors import AdvisorError, UsageError
from advisor.io.bundled import is_bundled
from advisor.model.inference import METHOD_LABELS, value_text
from advisor.model.modelfile import SCHEMA_VERSION, dumps_model, load_model, parse_model
from advisor.vocabulary import MODEL_DIRECTIONS

REFERENCE_FEATURES = ("has_reference", "reference_age_h", "reference_temp_delta_c")


def add_parser(sub, name: str, help: str) -> None:
    """Register ``train`` or ``model`` (this module owns both) on the top-level subparsers."""
    {"train": _add_train, "model": _add_model}[name](sub, name, help)


def _add_train(sub, name: str, help: str) -> None:
    train = sub.add_parser(
        name,
        help=help,
        description="Fit a small classifier per method (standardised logistic regression, each term bounded to "
        "the direction physics allows) on past attempts, print cross-validated metrics, write it as "
        "plain JSON and print the site-file line that uses it.",
        epilog="History columns: time (ISO 8601 with Z/offset), method (scan|astronomical), usable (yes/no) "
        "and/or residual_rms_um (with usable_max_rms_um or --usable-below-um), and the weather at the "
        "attempt as 'advisor attempt add' records it (wind_mean_ms, wind_gust_ms as 10-min mean and max, "
        "air_temp_c, rel_humidity_pct, air_temp_rate_c_per_h, optionally dew_point_c, visibility_m, "
        "precip_mm_h, pressure_hpa, solar_wm2). Rows without weather are computed from --feed, or from "
        "the site's feed. Terms: the site's model.terms, else gust², dew-point spread short of 3 °C and "
        "|dT/dt|, each of which can only lower the odds.",
    )
    train.add_argument(
        "--history", metavar="HISTORY.csv", help="past attempts, one per row (default: the site's history.path)"
    )
    train.add_argument(
        "--feed",
        metavar="ARCHIVE.csv",
        help="weather archive for the rows that carry no weather (default: the site's feed)",
    )
    train.add_argument("--site", metavar="SITE.yaml", help=session.SITE_HELP)
    train.add_argument(
        "--out",
        metavar="MODEL.json",
        help="where to write the model (with --install: default a dated file beside the site file)",
    )
    train.add_argument(
        "--install",
        action="store_true",
        help="point the site file's model.path at the new model (the old model file is kept)",
    )
    train.add_argument(
        "--method",
        choices=tuple(METHOD_LABELS),
        action="append",
        help="train only this method (repeatable; default: both)",
    )
    train.add_argument(
        "--usable-below-um",
        type=float,
        metavar="UM",
        help="judge rows without 'usable' (or usable_max_rms_um) by residual_rms_um <= UM",
    )
    train.set_defaults(func=cmd_train)


def _add_model(sub, name: str, help: str) -> None:
    model = sub.add_parser(name, help=help, description="Inspect a site model written by 'advisor train'.")
    actions = model.add_subparsers(dest="action", metavar="ACTION")
    show = actions.add_parser("show", help="what a model was trained on, its metrics and coefficients")
    show.add_argument("path", metavar="MODEL.json")
    show.add_argument(
        "--svg",
        metavar="FILE.svg",
        help="also draw the reliability diagram and each term's effect as a self-contained SVG",
    )
    show.set_defaults(func=cmd_model_show)
    model.set_defaults(func=lambda args: session.missing_action(model))


# --- shared text ---------------------------------------------------------------------------


def _pct(x: float) -> str:
    return f"{100 * x:.0f} %"


def _metrics_lines(label: str, metrics: dict) -> list[str]:
    auc = f"ROC AUC {metrics['roc_auc']:.2f}"
    if "roc_auc_unconstrained" in metrics:
        auc += f" ({metrics['roc_auc_unconstrained']:.2f} without the direction bounds)"
    lines = [
        f"{label}: {metrics['attempts']} attempts, {metrics['usable']} usable / {metrics['unusable']} not "
        f"({_pct(metrics['usable_fraction'])} usable)",
        f"  cross-validated ({metrics['cv_folds']}-fold): {auc}, "
        f"Brier score {metrics['brier']:.3f} (always guessing {_pct(metrics['usable_fraction'])}: "
        f"{metrics['brier_base_rate']:.3f})",
        "  reliability (held-out):  predicted    mean p   observed usable   attempts",
    ]
    for row in metrics.get("reliability", []):
        mean_p = "—" if row["mean_predicted"] is None else f"{row['mean_predicted']:.2f}"
        obs = "—" if row["observed_usable"] is None else f"{row['observed_usable']:.2f}"
        lines.append(
            f"                           {row['p_from']:.1f}–{row['p_to']:.1f}    {mean_p:>6}   "
            f"{obs:>15}   {row['attempts']:>8}"
        )
    return lines


def _coefficient_lines(method_model) -> list[str]:
    intercept, per_unit = method_model.plain_coefficients()
    rows = [("term", "direction", "log-odds per unit", "training mean ± sd", "trained on")]
    rows.append(("intercept (every term at zero)", "", f"{intercept:+.3f}", "", ""))
    lo, hi = method_model.feature_min, method_model.feature_max
    for k, (term, w, m, s) in enumerate(zip(method_model.terms, per_unit, method_model.mean, method_model.scale)):
        base = unit_text(CATALOGUE[term.feature].unit)
        unit = f"({base})²" if term.transform == "square" else base
        span = ""
        if lo is not None and hi is not None and np.isfinite(lo[k]) and np.isfinite(hi[k]):
            span = f"{value_text(term.feature, lo[k])} .. {value_text(term.feature, hi[k])}"
        rows.append((term.describe(), term.direction, f"{w:+.4g} per {unit}", f"{m:.3g} ± {s:.3g} {unit}", span))
    widths = [max(len(r[k]) for r in rows) for k in range(len(rows[0]))]
    return ["  " + "  ".join(v.ljust(w) for v, w in zip(r, widths)).rstrip() for r in rows]


def _dropped_lines(metrics: dict) -> list[str]:
    lines = []
    for d in metrics.get("dropped_terms", []):
        lines.append(
            f"  left out: {d['term']} (declared: {MODEL_DIRECTIONS.get(d['direction'], d['direction'])}): {d['reason']}"
        )
    return lines


# --- train ---------------------------------------------------------------------------------


def _history_path(args, site) -> Path:
    if args.history:
        return Path(args.history)
    if site.history_path is not None:
        return site.history_path
    raise UsageError(
        "no history given and the site file names none",
        field="--history",
        hint="pass --history ATTEMPTS.csv, or add history: {path: attempts.csv} to the site file",
    )


def _out_path(args, site) -> Path:
    if args.install:
        if args.site is None:
            raise UsageError(
                "--install needs the site file to change",
                field="--install",
                hint="pass --site SITE.yaml (the bundled demo site is read-only)",
            )
        if not args.out:
            stamp = dt.datetime.now(dt.timezone.utc).strftime("%Y%m%dT%H%M%SZ")
            return Path(args.site).resolve().parent / f"{Path(args.site).stem}_model_{stamp}.json"
    if not args.out:
        raise UsageError(
            "no output file given",
            field="--out",
            hint="pass --out MODEL.json, or --install with --site to write one beside the site file",
        )
    out = Path(args.out)
    if args.install and site.model_path is not None and os.path.realpath(out) == os.path.realpath(site.model_path):
        raise UsageError(
            f"{out} is the model the site uses now; --install keeps it",
            field="--out",
            hint="write the new model to another file (or leave --out out for a dated name)",
        )
    return out


def _completion_feed(args, site, history):
    """The feed for rows without weather: --feed, else the site's feed when such rows exist (not the demo's)."""
    from advisor.io.feed import read_feed
    from advisor.io.history import own_weather

    if args.feed:
        return read_feed(Path(args.feed), session.feed_layout(site, named_on_command_line=True))
    if is_bundled(site.source):  # never complete a history with the invented demo weather unasked
        return None
    if own_weather(history.frame).all() or site.feed.path is None or not Path(site.feed.path).exists():
        return None
    return read_feed(site.feed.path, site.feed)


def cmd_train(args: argparse.Namespace) -> int:
    from advisor.io.fileio import atomic_write_text, refuse_overwrite
    from advisor.io.references import Registry, read_registry
    from advisor.io.site import load_site
    from advisor.model import training

    site = load_site(session.site_location(args.site)[0])
    if args.usable_below_um is not None and not (np.isfinite(args.usable_below_um) and args.usable_below_um > 0):
        raise UsageError(
            f"--usable-below-um {args.usable_below_um!r} must be a positive number of µm", field="--usable-below-um"
        )
    history_path = _history_path(args, site)
    out = _out_path(args, site)
    refuse_overwrite(out, {"--history": history_path, "--feed": args.feed, "--site": args.site}, "--out")
    change = _site_change(args, out)  # with --install, a site file that cannot be edited stops here
    history = training.read_history(history_path, args.usable_below_um)
    terms = training.site_terms(site)
    methods = tuple(dict.fromkeys(args.method)) if args.method else tuple(METHOD_LABELS)
    feed = _completion_feed(args, site, history)
    needs_registry = any(t.feature in REFERENCE_FEATURES for m in methods for t in terms[m])
    registry = read_registry(site.references_path) if needs_registry else Registry.empty()
    hf = training.history_features(history, site, feed, registry)
    meta: dict[str, object] = {
        "site": site.name,
        "features_from": _weather_words(hf),
        "terms_from": "site file (model.terms)" if site.model_terms else "default terms",
    }
    if feed is not None:
        meta["feed"] = {"file": Path(feed.source).name, "sha256": training.sha256_of(Path(feed.source))}
    if args.usable_below_um is not None:
        meta["usable_below_um"] = args.usable_below_um
    result = training.train(history, hf.features, methods, terms, metadata=meta)
    model = result.model
    text = dumps_model(model)
    parse_model(text, str(out))  # what we write must read back
    info = model.training["history"]
    print(
        f"advisor train: {info['rows']} attempts in {history_path} "
        f"({info['first_utc'][:10]} .. {info['last_utc'][:10]} UTC)"
    )
    print(f"  weather: {meta['features_from']}")
    if result.n_dropped:
        print(
            f"  {result.n_dropped} attempts left out: no usable weather at their time"
            + ("" if feed is not None else " (pass --feed ARCHIVE.csv to compute it)")
        )
    print(f"  terms: {meta['terms_from']}")
    for method, m in model.methods.items():
        print()
        print("\n".join(_metrics_lines(METHOD_LABELS[method], m.metrics)))
        print("\n".join(_coefficient_lines(m)))
        for line in _dropped_lines(m.metrics):
            print(line)
    atomic_write_text(out, text)
    print()
    print(f"wrote {out} ({len(text.encode('utf-8')) / 1000:.1f} kB); inspect it with: advisor model show {out}")
    _say_how_to_use(args, out, change)
    return 0


def _weather_words(hf) -> str:
    parts = [f"{hf.count('history')} recorded with the attempt"]
    if hf.feed_source is not None:
        parts.append(f"{hf.count('feed')} computed from the feed {hf.feed_source}")
    parts.append(f"{hf.count('none')} without usable weather")
    return ", ".join(parts)


def _site_change(args, out: Path):
    """The site-file edit that points model.path at ``out`` (checked before anything is written), or None."""
    from advisor.io.siteedit import model_path_change

    if args.site is None:
        return None
    if args.install:
        return model_path_change(args.site, out)  # a problem here stops train before it writes
    try:
        return model_path_change(args.site, out)
    except AdvisorError as exc:  # advice only: the model is written either way
        print(f"advisor: warning: cannot show the site-file line: {exc.one_line()}", file=sys.stderr)
        return None


def _say_how_to_use(args, out: Path, change) -> None:
    from advisor.io.fileio import atomic_write_text

    if args.site is None:
        print(f"to use it: --model {out} on check/outlook/tick, or in your site file: model: {{path: {out}}}")
        return
    if change is None:
        print(f"to use it, set model.path in {args.site} to {out}")
        return
    if args.install:
        try:
            atomic_write_text(Path(args.site), change.text)
        except OSError as exc:
            raise UsageError(
                f"cannot write {args.site}: {exc.strerror}; the model is in {out}",
                field="--install",
                hint=f"set model.path to {out} by hand",
            ) from None
        was = f" (was {change.old_value}; that file is kept)" if change.old_value else ""
        print(f"installed: {args.site}:{change.line}: {change.line_text.strip()}{was}")
        return
    print(
        f"to use it, set line {change.line} of {args.site} to:  {change.line_text.strip()}"
        + (f"   (now: path: {change.old_value})" if change.old_value else "   (under model:)")
        + "\n  or run train again with --install to write it"
    )


# --- model show ----------------------------------------------------------------------------


def cmd_model_show(args: argparse.Namespace) -> int:
    from advisor.text import clean_text

    model = load_model(args.path)
    t = model.training
    lines = [f"site model {args.path} (schema {SCHEMA_VERSION})"]
    if t.get("trained_by"):
        lines.append(f"trained by: {t['trained_by']}")
    libs = t.get("libraries") or {}
    if libs:
        lines.append("libraries: " + ", ".join(f"{k} {v}" for k, v in libs.items()))
    hist = t.get("history") or {}
    if hist:
        lines.append(
            f"history: {hist.get('file')}, {hist.get('rows')} rows, {hist.get('first_utc')} .. "
            f"{hist.get('last_utc')}, sha256 {hist.get('sha256')}"
        )
    if t.get("feed"):
        lines.append(f"weather archive: {t['feed'].get('file')}, sha256 {t['feed'].get('sha256')}")
    for key, label in (
        ("features_from", "weather"),
        ("terms_from", "terms"),
        ("site", "site"),
        ("estimator", "estimator"),
        ("cross_validation", "cross-validation"),
        ("usable_below_um", "usable below [µm]"),
    ):
        if key in t:
            lines.append(f"{label}: {t[key]}")
    lines.append("features: " + ", ".join(f"{n} [{unit_text(u)}]" for n, u in model.features))
    for method, m in model.methods.items():
        lines.append("")
        if {
            "attempts",
            "usable",
            "unusable",
            "usable_fraction",
            "cv_folds",
            "roc_auc",
            "brier",
            "brier_base_rate",
        } <= set(m.metrics):
            lines.extend(_metrics_lines(METHOD_LABELS[method], m.metrics))
        else:
            lines.append(f"{METHOD_LABELS[method]}: (no metrics recorded)")
        lines.append("  p_usable = 1 / (1 + exp(-(intercept + Σ coefficient × term))):")
        lines.extend(_coefficient_lines(m))
        lines.extend(_dropped_lines(m.metrics))
    if args.svg:
        from advisor.io.fileio import atomic_write_text, refuse_overwrite
        from advisor.views.model_svg import model_svg

        refuse_overwrite(args.svg, {"MODEL.json": args.path}, "--svg")
        try:
            atomic_write_text(Path(args.svg), model_svg(model, title=Path(args.path).name))
        except OSError as exc:
            raise UsageError(f"cannot write {args.svg}: {exc.strerror}", field="--svg") from None
        lines += ["", f"wrote {args.svg}: reliability diagram and the effect of each term"]
    print(clean_text("\n".join(lines), keep_newlines=True))  # the training texts come from the file
    return 0
