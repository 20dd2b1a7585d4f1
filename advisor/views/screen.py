"""The operator's screen for one :class:`advisor.decision.Call`, as lines of styled segments.

    screen_lines(call, ctx, width=76, max_lines=20, details=False)

One layout for the coloured panel and the plain text (:mod:`advisor.views.panel`,
:mod:`advisor.views.plain`), so both read the same:

1. the verdict and its cause (the call's numbers, or what stops every method);
2. when, the target frequency and wavelength, the data's age; demo banner and notes;
3. the next window, when the feed reaches ahead;
4. the two methods side by side, with what blocks each;
5. the reasons grouped "why this call / why not the other / cautions" in plain words;
6. a few conditions, the advisory-only caution, and the verdict again on the last line.

The compact default (``details=False``) fits ``max_lines`` lines of ``width`` columns: items are
dropped from the longest group first and each group says how many more ``--details`` shows.
``details=True`` shows every reason in full with its rule id, every key condition and the full
cautions.  Lines are folded here (never between a number and its unit), so a view only draws them.
"""

from __future__ import annotations

from advisor import fmt
from advisor.decision import Call
from advisor.views.callparts import (
    METHOD_LABEL,
    Section,
    blocked_ids,
    blocked_names,
    candidate_rows,
    cause_line,
    conditions_line,
    data_age_text,
    effect_word,
    key_features,
    next_window_text,
    sections,
    target_text,
    when_text,
)
from advisor.views.context import CAUTION_SHORT, CAUTIONS, Context
from advisor.vocabulary import DEMO_BANNER, VERDICT

Segment = tuple[str, "str | None"]
Line = list[Segment]

#: Colour of each effect's word and of the groups' bullets.
EFFECT_STYLE = {"block": "red", "warn": "yellow", "add_error": "magenta", "info": "cyan"}
#: Lines the compact screen may take: a 24-line terminal less the panel's two borders, the command
#: line and the next prompt.
COMPACT_LINES = 20
DETAILS_HINT = "every reason and condition: add --details"
#: The last line's hint while the demo is in use: what to try next.
DEMO_HINT = "next: --details · advisor outlook · advisor demo copy DIR"


def _wrapped(
    text: str, width: int, style: str | None = None, indent: str = "", first: str = "", max_rows: int | None = None
) -> list[Line]:
    rows = fmt.wrap(text, width, indent=indent, first_indent=first)
    if max_rows is not None and len(rows) > max_rows:
        rows = rows[:max_rows]
        last = rows[-1]
        rows[-1] = (last[: width - 1].rstrip() if len(last) >= width else last.rstrip()) + "…"
    return [[(r, style)] for r in rows]


def _joined(parts: list[str], width: int, style: str | None = None, sep: str = " · ") -> list[Line]:
    """``parts`` joined by ``sep`` and folded only between parts (each part stays whole when it fits)."""
    rows: list[str] = []
    for part in parts:
        if rows and len(rows[-1]) + len(sep) + len(part) <= width:
            rows[-1] += sep + part
        else:
            rows.extend(fmt.wrap(part, width) if len(part) > width else [part])
    return [[(r, style)] for r in rows]


def _badge(call: Call, plain: bool) -> Segment:
    v = VERDICT[call.verdict]
    return (f"VERDICT: {v.label} —", None) if plain else (f" {v.label} ", v.style)


def _head(call: Call, width: int, max_rows: int | None, plain: bool) -> list[Line]:
    badge = _badge(call, plain)
    first_w = width - len(badge[0]) - (1 if plain else 2)
    indent = "  " if plain else " " * (len(badge[0]) + 2)
    text = cause_line(call, limit=2 if max_rows is None else 1)
    rows = fmt.wrap(text, first_w, indent="")
    if len(rows) > 1:  # the rest folds to the continuation width
        rest = text[len(rows[0]) :].strip()
        rows = rows[:1] + fmt.wrap(rest, width - len(indent))
    if max_rows is not None and len(rows) > max_rows:
        rows = rows[:max_rows]
        rows[-1] = rows[-1][: width - len(indent) - 1].rstrip() + "…"
    lines: list[Line] = [[badge, (" " + rows[0] if plain else "  " + rows[0], "bold")]]
    lines += [[(indent + r, "bold")] for r in rows[1:]]
    return lines


def _table(call: Call, width: int, details: bool) -> list[Line]:
    """The methods side by side; the last column (what blocks each) folds within its cell."""
    headers = (
        ("method", "feasible", "surface rms", "Ruze η", "p usable", "takes", "blocked by")
        if details
        else ("method", "feasible", "rms", "η", "odds", "takes", "blocked by")
    )
    keep = range(7) if details else (0, 2, 3, 4, 5, 6)
    rows, names = [], {}
    for method, row in zip(METHOD_LABEL, candidate_rows(call)):
        row = list(row)
        names[method] = blocked_ids(call, method) if details else blocked_names(call, method)
        rows.append((method, [row[k] for k in keep]))
    head = [headers[k] for k in keep]
    widths = [max(len(head[k]), *(len(r[k]) for _, r in rows)) for k in range(len(head) - 1)]
    lead = sum(widths) + 2 * (len(widths))
    last_w = max(14, width - lead)
    numeric = {"surface rms", "Ruze η", "p usable", "rms", "η", "odds", "takes"}
    for method, r in rows:
        r[-1] = _blocked_cell(names[method], call.candidates[method]["feasible"], last_w, None if details else 1)

    def cells(values: list[str]) -> str:
        return "  ".join(v.rjust(w) if h in numeric else v.ljust(w) for v, w, h in zip(values, widths, head))

    out: list[Line] = [[(cells(head[:-1]) + "  " + head[-1], "bold")]]
    for method, r in rows:
        feasible = call.candidates[method]["feasible"]
        folded = fmt.wrap(r[-1], last_w) or [""]
        style = "green" if feasible else "dim"
        out.append([(cells(r[:-1]) + "  ", style), (folded[0], None if feasible else "red")])
        out += [[(" " * lead + more, "red")] for more in folded[1:]]
    return out


def _blocked_cell(names: list[str], feasible: bool, width: int, max_rows: int | None) -> str:
    """What blocks a method, folded into at most ``max_rows`` rows: the rest as ``+N more``."""
    if not names:
        return "—" if feasible else "not feasible"
    for shown in range(len(names), 0, -1):
        text = ", ".join(names[:shown]) + (f", +{len(names) - shown} more" if shown < len(names) else "")
        if max_rows is None or len(fmt.wrap(text, width)) <= max_rows:
            return text
    return f"{names[0]}, +{len(names) - 1} more"


def _section_lines(section: Section, width: int, details: bool, limit: int | None) -> list[Line]:
    items = section.items if limit is None else section.items[:limit]
    hidden = len(section.items) - len(items)
    title: Line = [(section.title, "bold underline")]
    if hidden > 0:
        title.append((f"  +{hidden} more with --details", "dim"))
    lines: list[Line] = [title]
    for item in items:
        bullet = effect_word(item.effect) if details else "•"
        style = EFFECT_STYLE.get(item.effect)
        text = item.text + f"  [{item.rule}]" if details else item.short if item.effect == "info" else item.cause
        pad = len(bullet) + 2
        rows = fmt.wrap(text, width - pad)
        if not details and len(rows) > 2:
            rows = rows[:2]
            rows[1] = rows[1][: width - pad - 1].rstrip() + "…"
        lines.append([(" " + bullet.ljust(pad - 1), style), (rows[0], None)])
        lines += [[(" " * pad + r, None)] for r in rows[1:]]
    return lines


def _conditions(call: Call, width: int, details: bool) -> list[Line]:
    if not details:
        return _joined(conditions_line(call).split(" · "), width, "dim")
    cells = key_features(call.features)
    if call.calibrator_name:
        cells.append(("best calibrator", call.calibrator_name))
    lw = max(len(label) for label, _ in cells)
    vw = max(len(text) for _, text in cells)
    lines: list[Line] = [[("Key conditions", "bold underline")]]
    two = width >= 2 * (lw + vw + 4)
    step = 2 if two else 1
    for k in range(0, len(cells), step):
        line: Line = []
        for label, text in cells[k : k + step]:
            line += [(" " + label.ljust(lw), "dim"), (" " + text.rjust(vw) + "  ", None)]
        lines.append(line)
    return lines


def screen_lines(
    call: Call,
    ctx: Context,
    width: int = 76,
    max_lines: int = COMPACT_LINES,
    details: bool = False,
    status: int | None = None,
    hint: str = DETAILS_HINT,
    plain: bool = False,
) -> list[Line]:
    """The screen as lines of (text, style) segments, each at most ``width`` columns."""
    width = max(40, width)
    groups = [g for g in sections(call) if details or g.title != "Other notes"]
    limits = [len(s.items) for s in groups]
    show_conditions = True
    head_rows = None if details else 2
    while True:
        lines = _compose(call, ctx, width, details, groups, limits, show_conditions, head_rows, status, hint, plain)
        if details or len(lines) <= max_lines:
            return lines
        # shrink: the last group with more than one item loses one (the first group, why this
        # call, keeps its items longest); then the last groups go; then the conditions line;
        # then the cause folds to one line
        k = next((j for j in reversed(range(len(limits))) if limits[j] > 1), None)
        if k is not None:
            limits[k] -= 1
        elif len(groups) > 1:
            groups, limits = groups[:-1], limits[:-1]
        elif show_conditions:
            show_conditions = False
        elif head_rows and head_rows > 1:
            head_rows = 1
        else:
            return lines


def _compose(call, ctx, width, details, groups, limits, show_conditions, head_rows, status, hint, plain) -> list[Line]:
    lines: list[Line] = _head(call, width, head_rows, plain)
    lines += _joined([when_text(call, ctx), target_text(call), data_age_text(call)], width)
    if ctx.is_demo:
        lines += _wrapped(DEMO_BANNER, width, "bold magenta")
    for note in ctx.notes:
        lines += _wrapped(note, width, "italic", indent="  ")
    if ctx.next_window:
        lines += _wrapped(
            next_window_text(ctx.next_window, ctx.time_zone, compact=not details, since=call.time_utc),
            width,
            "bold",
            indent="  ",
        )
    lines.append([("", None)])
    lines += _table(call, width, details)
    for section, limit in zip(groups, limits):
        if details or section is groups[0]:
            lines.append([("", None)])
        lines += _section_lines(section, width, details, None if details else limit)
    if details:
        lines.append([("", None)])
        lines += _conditions(call, width, True)
        lines.append([("", None)])
        lines += _wrapped(f"feed: {ctx.feed_source}", width, "dim", indent="  ")
        lines += _wrapped(" ".join(CAUTIONS), width, "dim italic")
    else:
        if show_conditions:
            lines += _conditions(call, width, False)
        elif groups:
            lines.append([("", None)])
        lines += _wrapped(CAUTION_SHORT, width, "dim italic")
    if details:
        tail = f"exit status {status}" if status is not None else ""
    else:
        tail = DEMO_HINT if ctx.is_demo and hint == DETAILS_HINT else hint
    badge = _badge(call, plain)
    lines.append([(badge[0].rstrip(" —"), badge[1]), ("  " + tail if tail else "", "dim")])
    return lines


def plain_text(lines: list[Line]) -> str:
    """The lines as plain text (trailing spaces dropped)."""
    return "\n".join("".join(t for t, _ in line).rstrip() for line in lines) + "\n"
