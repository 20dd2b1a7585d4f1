"""The advisory a scheduled run publishes: its JSON object, the issued line, and the HTML page.

    advisory_json(check_doc, change)      the ``check --json`` object plus the run's own keys
    issued_line(change)                   'Issued ... by advisor tick; scan since ...'
    advisory_title(verdict, site_name)    the page title
    advisory_html(panel, change, title, stale_after_min)   a self-contained page that reloads
                                          itself and turns red when the advisory grows stale
"""

from __future__ import annotations

import html
import io

from advisor.evaluation.advisory import Change, dead_feed_note, short_utc
from advisor.vocabulary import VERDICT

HTML_REFRESH_S = 60
HTML_WIDTH_COLUMNS = 100


def advisory_json(check_doc: dict, change: Change) -> dict:
    """The ``check --json`` object plus the tick's own keys."""
    doc = dict(check_doc)
    doc.update({"issued_utc": change.state.issued_utc, "changed_since": change.state.since_utc,
                "previous_verdict": change.previous_verdict,
                "undetermined_ticks": change.state.undetermined_ticks,
                "feed_looks_dead": change.feed_looks_dead})
    return doc


def issued_line(change: Change) -> str:
    """When this advisory was issued and since when its verdict holds."""
    return (f"Issued {short_utc(change.state.issued_utc)} by advisor tick; "
            f"{change.state.verdict} since {short_utc(change.state.since_utc)}.")


_HTML_PAGE = """<!DOCTYPE html>
<html lang="en">
<head>
<meta charset="UTF-8">
<meta http-equiv="refresh" content="{refresh}">
<meta name="viewport" content="width=device-width, initial-scale=1">
<title>{title}</title>
<style>
{{stylesheet}}
body {{{{
    color: {{foreground}};
    background-color: {{background}};
    margin: 1.2em;
}}}}
pre {{{{ font-size: clamp(10px, min(1.5vw, 1.9vh), 28px); line-height: 1.2; margin: 0; }}}}
#stale {{{{ display: none; font: bold 1.6em sans-serif; color: #fff; background: #b00020;
          padding: 0.5em 0.8em; margin-bottom: 0.6em; }}}}
.issued {{{{ font: 0.95em sans-serif; opacity: 0.75; margin-top: 0.6em; }}}}
</style>
</head>
<body>
<div id="stale" data-issued="{issued}" data-stale-min="{stale_min}"></div>
<pre style="font-family:'DejaVu Sans Mono',Menlo,consolas,'Courier New',monospace"><code style="font-family:inherit">{{code}}</code></pre>
<p class="issued">{issued_text} This page reloads every {refresh} s and turns red when the advisory is
older than {stale_min} min.</p>
<noscript><p class="issued">Scripts are off: check the issued time yourself.</p></noscript>
<script>
(function () {{{{
  var box = document.getElementById("stale");
  function check() {{{{
    var age_min = (Date.now() - Date.parse(box.dataset.issued)) / 60000;
    if (age_min > Number(box.dataset.staleMin)) {{{{
      box.textContent = "STALE: this advisory is " + Math.round(age_min) +
        " min old. The tick job may have stopped; do not act on it.";
      box.style.display = "block";
    }}}}
  }}}}
  check();
  setInterval(check, 15000);
}}}})();
</script>
</body>
</html>
"""


def advisory_title(verdict: str, site_name: str) -> str:
    """``SCAN NOW · <site> · advisor``: the page title (the verdict first, for a browser tab)."""
    return f"{VERDICT[verdict].label} · {site_name} · advisor"


def advisory_html(panel, change: Change, title: str, stale_after_min: float) -> str:
    """The rich panel exported as a self-contained page with a meta refresh and a stale banner."""
    from rich.console import Console
    from rich.terminal_theme import MONOKAI
    from rich.text import Text

    def esc(text: str) -> str:  # HTML-escaped and safe inside a str.format template
        return html.escape(text).replace("{", "{{").replace("}", "}}")

    template = _HTML_PAGE.format(refresh=HTML_REFRESH_S, title=esc(title), issued=esc(change.state.issued_utc),
                                 stale_min=f"{stale_after_min:g}", issued_text=esc(issued_line(change)))
    console = Console(record=True, width=HTML_WIDTH_COLUMNS, file=io.StringIO(), force_terminal=True,
                      color_system="truecolor", no_color=False, legacy_windows=False)
    note = dead_feed_note(change)
    if note:
        console.print(Text(f" {note} ", style="bold white on red"))
    console.print(panel)
    return console.export_html(theme=MONOKAI, code_format=template, inline_styles=True)
