"""The advisory a scheduled run publishes: its JSON object, the issued line, and the HTML page.

    advisory_json(check_doc, change)      the ``check --json`` object plus the run's own keys
    issued_line(change)                   'Issued ... by advisor tick; scan since ...'
    advisory_title(verdict, site_name)    the page title
    advisory_html(call, ctx, change, stale_after_min)   the control-room page

The page is made for a wall screen (1920×1080) and a phone (390×844): the verdict is the largest
thing on it; its cause, the age of the advisory and of the data, the next window and what blocks
each method come next, all without scrolling; the grouped reasons, the conditions and the
cautions follow.  It is one self-contained file (no fonts, scripts or pictures from elsewhere:
control-room networks are often offline), reloads itself every minute, and turns red with a
STALE banner when it grows older than the feed's ``max_feed_age_min``.
"""

from __future__ import annotations

import html

import pandas as pd

from advisor import fmt
from advisor.decision import Call
from advisor.evaluation.advisory import Change, dead_feed_note, short_utc
from advisor.views.callparts import (
    METHOD_LABEL,
    blocked_names,
    candidate_rows,
    cause_line,
    data_age_text,
    key_features,
    next_window_text,
    sections,
    target_text,
    when_text,
)
from advisor.views.context import CAUTIONS, Context
from advisor.vocabulary import DEMO_BANNER, VERDICT

HTML_REFRESH_S = 60
#: Page colours per verdict (background, text), matching the terminal's badge colours.
VERDICT_COLOURS = {
    "scan": ("#1e8c3a", "#ffffff"),
    "astronomical": ("#0e7c99", "#ffffff"),
    "postpone": ("#c99a06", "#111111"),
    "undetermined": ("#c62828", "#ffffff"),
}


def advisory_json(check_doc: dict, change: Change) -> dict:
    """The ``check --json`` object plus the tick's own keys."""
    doc = dict(check_doc)
    doc.update(
        {
            "issued_utc": change.state.issued_utc,
            "changed_since": change.state.since_utc,
            "previous_verdict": change.previous_verdict,
            "undetermined_ticks": change.state.undetermined_ticks,
            "feed_looks_dead": change.feed_looks_dead,
        }
    )
    return doc


def issued_line(change: Change) -> str:
    """When this advisory was issued and since when its verdict holds."""
    return (
        f"Issued {short_utc(change.state.issued_utc)} by advisor tick; "
        f"{change.state.verdict} since {short_utc(change.state.since_utc)}."
    )


def advisory_title(verdict: str, site_name: str) -> str:
    """``SCAN NOW · <site> · advisor``: the page title (the verdict first, for a browser tab)."""
    return f"{VERDICT[verdict].label} · {site_name} · advisor"


_STYLE = """
* { box-sizing: border-box; }
html { font-size: clamp(15px, min(1.4vw, 2.1vh), 30px); }
body { margin: 0; padding: 0.8rem 1rem; background: #14171c; color: #e8e8e8;
       font-family: system-ui, "DejaVu Sans", "Helvetica Neue", Arial, sans-serif; line-height: 1.3; }
#stale { display: none; background: #b00020; color: #fff; font-weight: bold; font-size: 1.5rem;
         padding: 0.4rem 0.7rem; margin-bottom: 0.5rem; }
body.stale #stale { display: block; }
body.stale #verdict { opacity: 0.35; text-decoration: line-through; }
.alarm { background: #b00020; color: #fff; font-weight: bold; padding: 0.3rem 0.6rem; margin: 0 0 0.5rem; }
main { display: grid; grid-template-columns: minmax(0, 1.15fr) minmax(0, 1fr); gap: 0.4rem 2.5rem; }
#now, #reasons { min-width: 0; }
#top { grid-column: 1 / -1; display: flex; flex-wrap: wrap; align-items: center; gap: 0.3rem 1.2rem; }
#verdict { display: inline-block; font-weight: 800; letter-spacing: 0.02em; line-height: 1.05; white-space: nowrap;
           font-size: min(calc((100vw - 3rem) / (var(--chars) * 0.82 + 0.7)), 14vh, 15rem);
           padding: 0.04em 0.3em; border-radius: 0.12em;
           background: var(--verdict-bg); color: var(--verdict-fg); margin: 0; }
#cause { font-size: 1.45rem; font-weight: 600; margin: 0.2rem 0 0.3rem; }
#when, #age { margin: 0.15rem 0; }
#age { font-size: 1.15rem; }
#age .ago { font-weight: bold; }
.demo { color: #ff79c6; font-weight: bold; margin: 0.2rem 0; }
#top .demo { max-width: 30rem; margin: 0; }
.note { font-style: italic; margin: 0.2rem 0; }
#next { font-size: 1.1rem; font-weight: 600; margin: 0.4rem 0; padding: 0.3rem 0.6rem;
        border-left: 0.3rem solid var(--verdict-bg); background: #1d2128; }
.method { margin: 0.35rem 0; padding: 0.3rem 0.6rem; background: #1d2128; border-radius: 0.3rem; }
.method .name { font-weight: bold; }
.method .figs { white-space: nowrap; color: #c8c8c8; }
.method.ok .state { color: #6ee787; font-weight: bold; }
.method.blocked .state { color: #ff8a80; font-weight: bold; }
h2 { font-size: 1.1rem; margin: 0.6rem 0 0.2rem; border-bottom: 1px solid #3a3f48; }
ul { margin: 0; padding-left: 1.2rem; }
li { margin: 0.1rem 0; }
li .who { color: #9aa4b2; }
dl { display: grid; grid-template-columns: repeat(2, max-content minmax(max-content, 1fr)); gap: 0.05rem 0.8rem;
     margin: 0.2rem 0; font-size: 0.9rem; }
dt { color: #9aa4b2; white-space: nowrap; }
dd { margin: 0; text-align: right; white-space: nowrap; }
footer { grid-column: 1 / -1; font-size: 0.85rem; color: #9aa4b2; margin-top: 0.6rem; }
.nowrap { white-space: nowrap; }
@media (max-width: 760px), (orientation: portrait) {
  html { font-size: 15px; }
  body { padding: 0.5rem 0.6rem; }
  main { grid-template-columns: minmax(0, 1fr); }
  #cause { font-size: 1.15rem; }
  #top .demo { max-width: none; }
  #age, #next { font-size: 1rem; }
  dl { grid-template-columns: max-content minmax(max-content, 1fr); }
}
"""

_SCRIPT = """
(function () {
  var body = document.body, box = document.getElementById("stale"), ago = document.getElementById("ago");
  var issued = Date.parse(body.dataset.issued), limit = Number(body.dataset.staleMin);
  function words(min) {
    min = Math.max(0, Math.round(min));
    if (min < 60) return min + " min";
    var h = Math.floor(min / 60), m = min % 60;
    return h >= 48 ? Math.floor(h / 24) + " d " + (h % 24) + " h" : h + " h" + (m ? " " + m + " min" : "");
  }
  function check() {
    var age = (Date.now() - issued) / 60000;
    ago.textContent = "issued " + words(age) + " ago";
    if (age > limit) {
      body.classList.add("stale");
      box.textContent = "STALE: this advisory is " + words(age) + " old (limit " + words(limit) +
        "). The tick job may have stopped; do not act on it.";
    }
  }
  check();
  setInterval(check, 15000);
})();
"""


def _esc(text: str) -> str:
    return html.escape(text, quote=True)


def _nowrap_units(text: str) -> str:
    """Escaped ``text`` with non-breaking spaces between numbers and their units (``199 µm``)."""
    return _esc(fmt.keep_units(text))


def _methods(call: Call) -> str:
    out = []
    for method, row in zip(METHOD_LABEL, candidate_rows(call)):
        label, _, rms, eta, p, takes, _ = row
        names = blocked_names(call, method)
        feasible = call.candidates[method]["feasible"]
        state = "feasible" if feasible else ("blocked by: " + ", ".join(names) if names else "not feasible")
        figs = f"{rms} · η {eta} · odds {p} · {takes}"
        out.append(
            f'<div class="method {"ok" if feasible else "blocked"}" data-method="{method}">'
            f'<span class="name">{_esc(label)}</span> <span class="figs">{_nowrap_units(figs)}</span><br>'
            f'<span class="state">{_nowrap_units(state)}</span></div>'
        )
    return "\n".join(out)


def _reasons(call: Call) -> str:
    out = []
    for section in sections(call):
        items = "".join(f"<li>{_nowrap_units(item.short)}</li>" for item in section.items)
        out.append(f"<h2>{_esc(section.title)}</h2><ul>{items}</ul>")
    return "\n".join(out)


def _conditions(call: Call) -> str:
    cells = key_features(call.features)
    if call.calibrator_name:
        cells.append(("best calibrator", call.calibrator_name))
    body = "".join(f"<dt>{_esc(label)}</dt><dd>{_esc(text)}</dd>" for label, text in cells)
    return f"<h2>Conditions</h2><dl>{body}</dl>"


def advisory_html(call: Call, ctx: Context, change: Change, stale_after_min: float) -> str:
    """The control-room page of one advisory (see the module's description)."""
    verdict = VERDICT[call.verdict]
    bg, fg = VERDICT_COLOURS[call.verdict]
    state = change.state
    issued_local = fmt.local_utc(pd.Timestamp(state.issued_utc), ctx.time_zone)
    since_local = fmt.local_utc(pd.Timestamp(state.since_utc), ctx.time_zone)
    alarms = "".join(f'<p class="alarm">{_esc(n)}</p>' for n in [dead_feed_note(change)] if n)
    demo = f'<p class="demo">{_esc(DEMO_BANNER)}</p>' if ctx.is_demo else ""
    notes = "".join(f'<p class="note">{_esc(n)}</p>' for n in ctx.notes)
    if ctx.next_window:
        nxt = next_window_text(ctx.next_window, ctx.time_zone, compact=True, since=call.time_utc)
    else:
        nxt = "Next window: not known (the feed carries no rows after this time)."
    caution = " ".join(CAUTIONS)
    return f"""<!DOCTYPE html>
<html lang="en">
<head>
<meta charset="UTF-8">
<meta http-equiv="refresh" content="{HTML_REFRESH_S}">
<meta name="viewport" content="width=device-width, initial-scale=1">
<title>{_esc(advisory_title(call.verdict, ctx.site_name))}</title>
<style>{_STYLE}
:root {{ --verdict-bg: {bg}; --verdict-fg: {fg}; }}
</style>
</head>
<body class="v-{call.verdict}" data-issued="{_esc(state.issued_utc)}" data-stale-min="{stale_after_min:g}">
<div id="stale" role="alert"></div>
{alarms}<main>
<section id="top"><div id="verdict" style="--chars: {max(len(verdict.label), 6)}">{_esc(verdict.label)}</div>{demo}</section>
<section id="now">
<p id="cause">{_nowrap_units(cause_line(call))}</p>
<p id="age"><span id="ago" class="ago">issued {_esc(issued_local)}</span> · <span class="nowrap">{_esc(data_age_text(call))}</span>
· {_esc(call.verdict)} since <span class="nowrap">{_esc(since_local)}</span></p>
<noscript><p class="alarm">Scripts are off: check the issued time ({_esc(issued_local)}) yourself.</p></noscript>
<p id="next">{_nowrap_units(nxt)}</p>
<div id="methods">
{_methods(call)}
</div>
<p id="when">{_nowrap_units(f"{ctx.site_name} · {when_text(call, ctx)} · {target_text(call)}")}</p>
{notes}
</section>
<section id="reasons">
{_reasons(call)}
{_conditions(call)}
</section>
<footer>
<p>{_esc(issued_line(change))} This page reloads every {HTML_REFRESH_S} s and turns red when the advisory is
older than {_esc(fmt.duration_text(stale_after_min))}. Feed: {_esc(ctx.feed_source)}.</p>
<p>{_esc(caution)}</p>
</footer>
</main>
<script>{_SCRIPT}</script>
</body>
</html>
"""
