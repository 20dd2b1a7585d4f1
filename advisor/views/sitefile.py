"""The commented site file ``advisor site new`` drafts from a guessed feed layout.

    text = draft_site_file(guess, feed_path_text, source_name)

Every guess is written with the reason for it; everything a person must still say is the word
``TODO``, which the site reader refuses (one line naming the key), so the file is accepted by
``rules lint`` and ``check`` only once every TODO is filled in.
"""

from __future__ import annotations

import json
import textwrap

from advisor.io.feedguess import Guess
from advisor.io.feedlayout import CANONICAL_COLUMNS

__all__ = ["draft_site_file"]

WIDTH = 80  # every line fits in 80 columns
_WIDTH = 32  # comments start in this column where the value leaves room


def _quote(text: str) -> str:
    """A YAML scalar: plain when safe, else double-quoted (JSON quoting is valid YAML)."""
    safe = (
        text
        and all(ch.isalnum() or ch in "_./-" for ch in text)
        and not text[0].isdigit()
        and text not in ("TODO", "yes", "no", "true", "false", "null", "on", "off")
    )
    return text if safe else json.dumps(text, ensure_ascii=False)


def _comment(indent: int, text: str) -> list[str]:
    """A comment wrapped within :data:`WIDTH` columns."""
    pad = " " * indent + "# "
    return textwrap.wrap(
        text, WIDTH, initial_indent=pad, subsequent_indent=pad, break_on_hyphens=False, break_long_words=False
    ) or [pad.rstrip()]


def _line(indent: int, key: str, value: str, comment: str = "") -> list[str]:
    text = f"{' ' * indent}{key}: {value}"
    if not comment:
        return [text]
    inline = f"{text.ljust(_WIDTH)} # {comment}" if len(text) < _WIDTH else f"{text}  # {comment}"
    if len(inline) <= WIDTH:
        return [inline]
    return [*_comment(indent, comment), text]


def _mapping(indent: int, key: str, fields: list[tuple[str, str]], comment: str) -> list[str]:
    """``key: {a: 1, b: 2}`` when it fits within WIDTH, else one field per line."""
    flow = "{" + ", ".join(f"{k}: {v}" for k, v in fields) + "}"
    if len(" " * indent + key + ": " + flow) <= WIDTH:
        return _line(indent, key, flow, comment)
    return [*_comment(indent, comment), f"{' ' * indent}{key}:", *(f"{' ' * (indent + 2)}{k}: {v}" for k, v in fields)]


def _codes(codes) -> str:
    return "[" + ", ".join(_quote(c) if isinstance(c, str) else f"{c:g}" for c in codes) + "]"


def draft_site_file(guess: Guess, feed_path_text: str, source_name: str) -> str:
    """The YAML text of a site file for the feed of ``guess`` (see the module docstring)."""
    lay = guess.layout
    out = [
        f"# Site file drafted by `advisor site new` from {source_name}.",
        "# Fill in every TODO (the advisor refuses the file while one is left) and check",
        "# each guess, then try:  advisor feed inspect FEED --site THIS_FILE",
        "#                        advisor rules lint --site THIS_FILE",
        "site:",
        *_line(2, "name", "TODO", "the site's name, shown on every call"),
        *_line(2, "latitude_deg", "TODO", "degrees north (negative south)"),
        *_line(2, "longitude_deg", "TODO", "degrees east (negative west)"),
        *_line(2, "elevation_m", "TODO", "metres above sea level"),
        *_line(2, "time_zone", "TODO", "local times on screen: IANA name (America/Chicago) or UTC-05:00"),
        *_line(2, "dish_diameter_m", "TODO", "the reflector's diameter"),
        "",
        "feed:",
        *_line(
            2, "path", _quote(feed_path_text), "relative to this file" if not feed_path_text.startswith("/") else ""
        ),
    ]
    for line in guess.skipped_lines[:3]:
        out.append(f"  # above the header: {line[:58]}")
    if lay.skip_lines:
        out += _line(2, "skip_lines", str(lay.skip_lines), guess.notes.get("skip_lines", "").split(";")[0])
    if isinstance(lay.time_column, str):
        time_value = _quote(lay.time_column)
    else:
        time_value = "[" + ", ".join(_quote(c) for c in lay.time_column) + "]"
    out += _line(2, "time_column", time_value, guess.notes.get("time_column", ""))
    if lay.time_format or "time_format" in guess.todos:
        value = _quote(lay.time_format) if lay.time_format else "TODO"
        out += _line(
            2,
            "time_format",
            json.dumps(lay.time_format) if lay.time_format else value,
            guess.notes.get("time_format", guess.todos.get("time_format", "")),
        )
    if lay.time_unit:
        out += _line(2, "time_unit", lay.time_unit, guess.notes.get("time_unit", ""))
    if lay.time_label != "instant":
        out += _line(2, "time_label", lay.time_label, guess.notes.get("time_label", ""))
    if "time_zone" in guess.todos:
        out += _line(2, "time_zone", "TODO", guess.todos["time_zone"])
    if lay.missing:
        where = ", ".join(guess.codes_found)
        out += _line(2, "missing", _codes(lay.missing), f"no-value codes found in {where}" if where else "")
    if "gust_factor" in guess.todos:
        out += _line(2, "gust_factor", "TODO", guess.todos["gust_factor"])
    cadence = guess.cadence_min
    if cadence is not None:
        out.append(f"  # one sample every {cadence:g} min: the staleness and gap limits follow it")
        out.append("  # (max_feed_age_min, max_gap_min: set them to override)")
    out.append("  columns:")
    for name in CANONICAL_COLUMNS:
        col = guess.columns.get(name)
        if col is None:
            if name in guess.todos:
                out += _line(4, name, "{from: TODO, unit: TODO}", guess.todos[name])
            continue
        fields = [("from", _quote(col.source)), ("unit", _quote(col.unit))]
        comment = col.why
        if name == "precip_mm_h" and col.over_hours_from:
            fields.append(("over_hours_from", _quote(col.over_hours_from)))
            comment = "a depth over the hours given in that column"
        elif name == "precip_mm_h" and name in guess.todos:
            fields.append(("over_hours", "TODO"))
            comment = guess.todos[name]
        out += _mapping(4, name, fields, comment)
    if guess.unused:
        shown = ", ".join(guess.unused[:12]) + (f" and {len(guess.unused) - 12} more" if len(guess.unused) > 12 else "")
        out += _comment(2, f"not used: {shown}")
    out += [
        "",
        "references:",
        *_line(2, "path", "references.csv", "registry of reference scans (advisor reference add)"),
        "",
        "# Figures of both methods and thresholds: the defaults apply until you set them",
        "# (every key is in the demo site's file, example_weather/larch_basin.yaml).",
        "calibrators:",
        "  # bright compact sources, J2000 (e.g. ra: 12h29m06.7s, dec: +02d03m09s)",
        "  - {name: TODO, ra: TODO, dec: TODO}",
    ]
    return "\n".join(out) + "\n"
