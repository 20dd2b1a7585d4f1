"""``advisor demo copy DIR``: an editable copy of the invented demo site, to make a site of one's own.

Writes into DIR (created if absent): ``site.yaml`` (the demo site file, listing a rules file of
its own), ``site_rules.yaml`` (one example override, more in comments), the demo feed, forecast,
reference registry, history of attempts, site model and the demo folder's README.  Nothing is
overwritten: when any of these files already exists in DIR, nothing is written (exit 2).

While the copied feed is the demo's, every command still says DEMO DATA (the advisor recognises
its demo files by content, whatever they are called).
"""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

from advisor.commands.helpformat import HelpFormatter
from advisor.errors import UsageError

#: Demo files copied unchanged: (name in the demo folder, what it is).
COPIED = (
    ("larch_basin_mast.csv", "the weather feed (the site's feed.path); replace it with your mast's"),
    ("larch_basin_forecast.csv", "a forecast in the feed's format (forecast.path), for advisor outlook"),
    ("references.csv", "the reference-scan registry (references.path); advisor reference add appends"),
    ("larch_basin_history.csv", "past attempts, for advisor train --history"),
    ("larch_basin_model.json", "the site model trained on that history (model.path)"),
    ("README.md", "what the invented demo data are"),
)
SITE_NAME = "site.yaml"
RULES_NAME = "site_rules.yaml"

_SITE_RULES_TEXT = """\
# Rules of this site, layered over the advisor's defaults (see `advisor rules show --site site.yaml`).
# A rule with a default's id changes only the keys it gives; `enabled: false` switches one off;
# a new id adds a rule. Check with `advisor rules lint --site site.yaml`; the syntax is in the
# advisor's docs/rules.md.
rules:
  # An example to edit or delete: the default blocks the laser scan above 8 m/s gusts; this
  # (invented) site tolerates up to 16 kn (8.2 m/s).
  - id: gusts_shake_structure
    condition: wind_gust_ms > 16 kn

  # More examples:
  # - id: early_night                # a default rule: switch it off
  #   enabled: false
  # - id: frost_on_panels            # a rule of your own
  #   applies_to: scan
  #   condition: air_temp_c < 0.5 degC and dew_point_spread_c < 1.5 degC
  #   effect: add_error
  #   error_um: 25
  #   message: "Frost likely on the panels ({air_temp_c:.1f} °C): the laser returns are noisier."
"""

_SITE_RULES_LINK = """
# This site's own rules, layered over the defaults (paths relative to this file).
rules:
  - site_rules.yaml
"""


def add_parser(sub, name: str, help: str) -> argparse.ArgumentParser:
    """Register ``advisor demo``."""
    p = sub.add_parser(
        name, help=help, description="Work with the bundled invented demo site.", formatter_class=HelpFormatter
    )
    actions = p.add_subparsers(dest="action", metavar="ACTION")
    copy = actions.add_parser(
        "copy",
        help="write an editable copy of the demo site, feed, registry and model",
        description="Write an editable copy of the invented demo site (site file, "
        "a rules file of its own, feed, forecast, registry, history, model) "
        "into DIR. Refuses to overwrite any file.",
        formatter_class=HelpFormatter,
    )
    copy.add_argument("folder", metavar="DIR", help="folder to write into (created if absent)")
    copy.set_defaults(func=cmd_copy)
    p.set_defaults(func=lambda args: _usage(p))
    return p


def _usage(parser: argparse.ArgumentParser) -> int:
    parser.print_usage(sys.stderr)
    print(f"{parser.prog}: error: choose an action: copy DIR (see --help)", file=sys.stderr)
    return 2


def cmd_copy(args: argparse.Namespace) -> int:
    from advisor.io.bundled import demo_dir, demo_site_path
    from advisor.io.fileio import atomic_write_text

    folder = Path(args.folder).expanduser()
    if folder.exists() and not folder.is_dir():
        raise UsageError(f"{folder} is a file, not a folder", field="DIR", hint="give a new or empty folder")
    source = demo_dir()
    names = [SITE_NAME, RULES_NAME, *(name for name, _ in COPIED)]
    taken = [name for name in names if (folder / name).exists()]
    if taken:
        raise UsageError(
            f"{folder / taken[0]} already exists" + (f" (and {len(taken) - 1} more)" if len(taken) > 1 else ""),
            field="DIR",
            hint="choose a new or empty folder; nothing was written",
        )
    try:
        folder.mkdir(parents=True, exist_ok=True)
        site_text = demo_site_path().read_text(encoding="utf-8").rstrip("\n") + "\n" + _SITE_RULES_LINK
        atomic_write_text(folder / SITE_NAME, site_text)
        atomic_write_text(folder / RULES_NAME, _SITE_RULES_TEXT)
        for name, _ in COPIED:
            atomic_write_text(folder / name, (source / name).read_text(encoding="utf-8"))
    except OSError as exc:
        raise UsageError(
            f"cannot write into {folder}: {exc.strerror or exc}", field="DIR", hint="choose a folder you can write to"
        ) from None
    site = folder / SITE_NAME
    width = max(len(n) for n in names)
    print(f"Wrote an editable copy of the invented demo site to {folder}:")
    print(f"  {SITE_NAME:<{width}}  the site: name, location, dish, methods, thresholds, calibrators")
    print(f"  {RULES_NAME:<{width}}  your rules, layered over the defaults (one example, more in comments)")
    for name, what in COPIED:
        print(f"  {name:<{width}}  {what}")
    print("Next:")
    print(f"  advisor check --site {site}                # the demo call, from your copy")
    print(f"  advisor rules show --site {site}           # the rules in effect, and where each comes from")
    print(f"  then edit {site} (name, location, feed.path) and {folder / RULES_NAME}")
    print(
        "The feed is still the invented demo weather, so every command says DEMO DATA until you point "
        "feed.path at your own."
    )
    return 0
