"""``advisor train`` and ``advisor model show``: fitting and inspecting the site model.

``train`` fits the site model on a history of past attempts (scikit-learn, imported only when
``train`` runs); ``model show`` prints what a model file was trained on and its coefficients in
plain units.  Which model ``check`` uses is decided in :func:`advisor.commands.session.model_for`.
"""

from __future__ import annotations

import argparse
from pathlib import Path

import numpy as np

from advisor.commands import session
from advisor.errors import UsageError
from advisor.features import CATALOGUE
from advisor.model.inference import SCHEMA_VERSION, METHOD_LABELS, dumps_model, load_model, parse_model, unit_text


def add_parser(sub, name: str, help: str) -> None:
    """Register ``train`` or ``model`` (this module owns both) on the top-level subparsers."""
    {"train": _add_train, "model": _add_model}[name](sub, name, help)


def _add_train(sub, name: str, help: str) -> None:
    train = sub.add_parser(
        name, help=help,
        description="Fit a small classifier per method (standardised logistic regression) on past attempts, "
                    "print cross-validated metrics and write it as plain JSON.",
        epilog="History columns: time (ISO 8601 with Z/offset), method (scan|astronomical), usable (yes/no) "
               "and/or residual_rms_um (with usable_max_rms_um or --usable-below-um), and - unless --feed is given - the weather at the attempt: wind_mean_ms, "
               "wind_gust_ms (10-min mean and max), air_temp_c, rel_humidity_pct, air_temp_rate_c_per_h, and "
               "optionally visibility_m, precip_mm_h, pressure_hpa, solar_wm2.")
    train.add_argument("--history", required=True, metavar="HISTORY.csv", help="past attempts, one per row")
    train.add_argument("--feed", metavar="ARCHIVE.csv",
                       help="weather archive to compute the features from (default: the history's weather columns)")
    train.add_argument("--site", metavar="SITE.yaml", help="site file (default: the bundled invented demo site)")
    train.add_argument("--out", required=True, metavar="MODEL.json", help="where to write the model")
    train.add_argument("--method", choices=tuple(METHOD_LABELS), action="append",
                       help="train only this method (repeatable; default: both)")
    train.add_argument("--usable-below-um", type=float, metavar="UM",
                       help="judge rows without 'usable' (or usable_max_rms_um) by residual_rms_um <= UM")
    train.set_defaults(func=cmd_train)


def _add_model(sub, name: str, help: str) -> None:
    model = sub.add_parser(name, help=help, description="Inspect a site model written by 'advisor train'.")
    actions = model.add_subparsers(dest="action", metavar="ACTION")
    show = actions.add_parser("show", help="what a model was trained on, its metrics and coefficients")
    show.add_argument("path", metavar="MODEL.json")
    show.set_defaults(func=cmd_model_show)
    model.set_defaults(func=lambda args: session.missing_action(model))


# --- train ---------------------------------------------------------------------------------

def _pct(x: float) -> str:
    return f"{100 * x:.0f} %"


def _metrics_lines(label: str, metrics: dict) -> list[str]:
    lines = [f"{label}: {metrics['attempts']} attempts, {metrics['usable']} usable / {metrics['unusable']} not "
             f"({_pct(metrics['usable_fraction'])} usable)",
             f"  cross-validated ({metrics['cv_folds']}-fold): ROC AUC {metrics['roc_auc']:.2f}, "
             f"Brier score {metrics['brier']:.3f} (always guessing {_pct(metrics['usable_fraction'])}: "
             f"{metrics['brier_base_rate']:.3f})",
             "  reliability (held-out):  predicted    mean p   observed usable   attempts"]
    for row in metrics.get("reliability", []):
        mean_p = "—" if row["mean_predicted"] is None else f"{row['mean_predicted']:.2f}"
        obs = "—" if row["observed_usable"] is None else f"{row['observed_usable']:.2f}"
        lines.append(f"                           {row['p_from']:.1f}–{row['p_to']:.1f}    {mean_p:>6}   "
                     f"{obs:>15}   {row['attempts']:>8}")
    return lines


def _coefficient_lines(method_model) -> list[str]:
    intercept, per_unit = method_model.plain_coefficients()
    rows = [("term", "log-odds per unit", "training mean ± sd")]
    rows.append(("intercept (every term at zero)", f"{intercept:+.3f}", ""))
    for term, w, m, s in zip(method_model.terms, per_unit, method_model.mean, method_model.scale):
        base = unit_text(CATALOGUE[term.feature].unit)
        unit = f"({base})²" if term.transform == "square" else base
        rows.append((term.describe(), f"{w:+.4g} per {unit}", f"{m:.3g} ± {s:.3g} {unit}"))
    widths = [max(len(r[k]) for r in rows) for k in range(3)]
    return ["  " + "  ".join(v.ljust(w) for v, w in zip(r, widths)).rstrip() for r in rows]


def cmd_train(args: argparse.Namespace) -> int:
    from advisor.io.feed import read_feed
    from advisor.io.fileio import atomic_write_text, refuse_overwrite
    from advisor.io.site import load_site
    from advisor.model import training

    refuse_overwrite(args.out, {"--history": args.history, "--feed": args.feed, "--site": args.site}, "--out")
    site = load_site(args.site)
    if args.usable_below_um is not None and not (np.isfinite(args.usable_below_um) and args.usable_below_um > 0):
        raise UsageError(f"--usable-below-um {args.usable_below_um!r} must be a positive number of µm",
                         field="--usable-below-um")
    history = training.read_history(args.history, args.usable_below_um)
    feed = None
    meta: dict[str, object] = {"site": site.name, "features_from": "history's own weather columns"}
    if args.feed:
        feed = read_feed(Path(args.feed), session.feed_layout(site, named_on_command_line=True))
        meta["features_from"] = "archive feed"
        meta["feed"] = {"file": Path(args.feed).name, "sha256": training.sha256_of(Path(args.feed))}
    if args.usable_below_um is not None:
        meta["usable_below_um"] = args.usable_below_um
    features = training.history_features(history, site, feed)
    methods = tuple(dict.fromkeys(args.method)) if args.method else tuple(METHOD_LABELS)
    result = training.train(history, features, methods, metadata=meta)
    model = result.model
    text = dumps_model(model)
    parse_model(text, args.out)  # what we write must read back
    info = model.training["history"]
    print(f"advisor train: {info['rows']} attempts in {args.history} "
          f"({info['first_utc'][:10]} .. {info['last_utc'][:10]} UTC); features from the {meta['features_from']}")
    if result.n_dropped:
        print(f"  {result.n_dropped} attempts left out: no usable weather at their time")
    for method, m in model.methods.items():
        print()
        print("\n".join(_metrics_lines(METHOD_LABELS[method], m.metrics)))
        print("\n".join(_coefficient_lines(m)))
    atomic_write_text(Path(args.out), text)
    print()
    print(f"wrote {args.out} ({len(text.encode('utf-8')) / 1000:.1f} kB); inspect it with: advisor model show {args.out}")
    return 0


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
        lines.append(f"history: {hist.get('file')}, {hist.get('rows')} rows, {hist.get('first_utc')} .. "
                     f"{hist.get('last_utc')}, sha256 {hist.get('sha256')}")
    if t.get("feed"):
        lines.append(f"weather archive: {t['feed'].get('file')}, sha256 {t['feed'].get('sha256')}")
    for key, label in (("features_from", "features from"), ("site", "site"), ("estimator", "estimator"),
                       ("cross_validation", "cross-validation"), ("usable_below_um", "usable below [µm]")):
        if key in t:
            lines.append(f"{label}: {t[key]}")
    lines.append("features: " + ", ".join(f"{n} [{unit_text(u)}]" for n, u in model.features))
    for method, m in model.methods.items():
        lines.append("")
        if {"attempts", "usable", "unusable", "usable_fraction", "cv_folds", "roc_auc", "brier",
                "brier_base_rate"} <= set(m.metrics):
            lines.extend(_metrics_lines(METHOD_LABELS[method], m.metrics))
        else:
            lines.append(f"{METHOD_LABELS[method]}: (no metrics recorded)")
        lines.append("  p_usable = 1 / (1 + exp(-(intercept + Σ coefficient × term))):")
        lines.extend(_coefficient_lines(m))
    print(clean_text("\n".join(lines), keep_newlines=True))   # the training texts come from the file
    return 0
