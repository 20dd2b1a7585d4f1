"""Beneath every command: the shared options, parsed once into a :class:`Request`, and the inputs
loaded once from it (:func:`load_inputs`).

Each boundary rule of the command line is written here and only here:

* how a frequency and a time are read from the command line (:func:`parse_frequency_ghz`,
  :func:`parse_time`; messages name the option that was wrong);
* which site: ``--site``, else ``$ADVISOR_SITE``, else the site file in the configuration folder
  (``$XDG_CONFIG_HOME/advisor/site.yaml``, by default ``~/.config/advisor/site.yaml``), else the
  bundled invented demo, which says so (:func:`site_location`);
* which feed is read and how: the site's feed unless ``--feed`` names one, and a file named on
  the command line is never read with the demo logger's local time zone (:func:`feed_layout`);
  a feed whose irradiance contradicts the computed sun is refused or warned about
  (:func:`check_feed_zone`);
* rule layering: defaults → the site's files → ``--rules`` files (:func:`rule_files`);
* which site model gives the odds (:func:`model_for`);
* the default evaluation time: the demo feed's last observation for the demo, else now — and
  a feed whose observations run into the future is refused (:func:`evaluation_time`);
* the session a call is made for (``--session-hours``, else the site's ``thresholds.session_hours``);
* the site's forecast file goes with the site's own feed (:func:`with_site_forecast`);
* the call at one instant, shared by ``check``, ``tick`` and ``rules explain`` (:func:`run_check`),
  and the undetermined call when the feed itself cannot be read (:func:`check_without_feed`).

Command modules import this module, never each other.
"""

from __future__ import annotations

import argparse
import math
import sys
from dataclasses import dataclass, replace
from pathlib import Path
from typing import TYPE_CHECKING, Literal

import pandas as pd

from advisor.errors import AdvisorError, FeedError, ModelError, UsageError
from advisor.io.bundled import is_demo_file
from advisor.io.feed import CHECK_TAIL_BYTES, Feed, FeedQuality, read_feed
from advisor.io.references import Registry, read_registry
from advisor.io.site import FeedLayout, Site, load_site

if TYPE_CHECKING:
    from advisor.decision import Call, Decisions
    from advisor.model.inference import SiteModel
    from advisor.rules.ruleset import RuleSet
    from advisor.views.context import Context

from advisor.commands.options import (  # noqa: F401 (re-exported: the commands use session.*)
    _CUT_SHORT,
    _EPOCH,
    _FREQ,
    _FREQ_UNITS_GHZ,
    _WAVE_UNITS_MM,
    _WORDS_HINT,
    DAY_WORDS,
    DEFAULT_FREQ_GHZ,
    ELEVATION_RANGE_DEG,
    FREQ_RANGE_GHZ,
    FUTURE_TOLERANCE,
    NO_MODEL,
    SITE_ENV,
    SITE_HELP,
    TIME_FORMS,
    TimeOption,
    _epoch_message,
    add_evaluation_options,
    add_session_option,
    config_site_path,
    emit,
    missing_action,
    parse_elevation_deg,
    parse_frequency_ghz,
    parse_hours,
    parse_time,
    site_location,
    time_help,
    want_color,
)


@dataclass(frozen=True)
class Request:
    """The shared options of one command line, parsed and checked once."""

    site_path: Path | None = None  # None: the bundled demo site
    site_origin: str = "demo"  # --site, ADVISOR_SITE, the configuration file's path, or demo
    feed_path: Path | None = None  # None: the site's feed
    freq_ghz: float = DEFAULT_FREQ_GHZ
    at: TimeOption | None = None  # None: the default evaluation time
    references_path: Path | None = None  # None: the site's registry
    rule_files: tuple[Path, ...] = ()  # layered over the defaults and the site's
    model: str | None = None  # MODEL.json, 'none'/'off', or None: the site's
    session_hours: float | None = None  # None: the site's thresholds.session_hours
    elevation_deg: float | None = None  # None: the site's session.elevation_deg


def request_from(args: argparse.Namespace) -> Request:
    """Parse the shared options of ``args`` (those a command does not have take their defaults)."""

    def path(name: str) -> Path | None:
        value = getattr(args, name, None)
        return Path(value) if value else None

    freq = getattr(args, "freq", None)
    elevation = getattr(args, "elevation", None)
    site_path, site_origin = site_location(getattr(args, "site", None))
    return Request(
        site_path=site_path,
        site_origin=site_origin,
        feed_path=path("feed"),
        freq_ghz=parse_frequency_ghz(freq) if freq is not None else DEFAULT_FREQ_GHZ,
        at=parse_time(getattr(args, "at", None), "--at"),
        references_path=path("references"),
        rule_files=tuple(Path(p) for p in (getattr(args, "rules", None) or ())),
        model=getattr(args, "model", None),
        session_hours=parse_hours(getattr(args, "session_hours", None), "--session-hours", 0.0, 24.0 * 7),
        elevation_deg=parse_elevation_deg(elevation) if elevation is not None else None,
    )


# --------------------------------------------------------------------------- loading


def feed_layout(site: Site, named_on_command_line: bool) -> FeedLayout:
    """How to read a feed file for ``site``.

    The demo logger's local time zone is never guessed onto a file the user named: with the
    demo site, such a file must carry its own UTC offsets.
    """
    if site.is_demo and named_on_command_line:
        return replace(site.feed, time_zone=None)
    return site.feed


def rule_files(site: Site, extra=()) -> list[tuple[Path, str]]:
    """The layered ``(file, layer)`` list: the defaults, then the site's files, then ``extra``."""
    from advisor.io.bundled import default_rule_files

    files = [(Path(p), "default") for p in default_rule_files()]
    files += [(Path(p), "site") for p in site.rule_paths]
    files += [(Path(p), "command line") for p in (extra or ())]
    return files


def load_ruleset(site: Site, extra=()) -> RuleSet:
    """The effective rule set for ``site`` with ``extra`` files layered on top (checked once per
    content of the files: :func:`advisor.rules.stored.load_rules_cached`)."""
    from advisor.features import CATALOGUE
    from advisor.rules.stored import load_rules_cached

    return load_rules_cached(rule_files(site, extra), CATALOGUE)


def model_for(
    choice: str | None, site: Site, notes: list[str], demo_model_on_other_feed: bool = False
) -> SiteModel | None:
    """The site model giving the odds: ``--model FILE`` / ``--model none``, else the site's model.

    An unusable file is reported on stderr and in ``notes``; the call then rests on the rules.
    """
    if choice is not None and choice.strip().lower() in NO_MODEL:
        notes.append("Site model switched off (--model none): the call rests on rules and the error budget only.")
        return None
    path = Path(choice) if choice is not None else site.model_path
    if path is None:
        return None
    from advisor.model.modelfile import load_model

    try:
        model = load_model(path)
    except ModelError as exc:
        print(f"advisor: warning: {exc.one_line()}; falling back to rules only", file=sys.stderr)
        what = f"{exc.field}: {exc.message}" if exc.field else exc.message
        where = f"{exc.location()}: " if exc.location() else ""
        notes.append(f"Site model not used ({where}{what}): the call rests on rules and the error budget only.")
        return None
    if demo_model_on_other_feed and choice is None:
        notes.append("The odds come from the demo site's model, trained on an invented history.")
    return model


@dataclass(frozen=True)
class Inputs:
    """Everything loaded for one evaluation."""

    site: Site
    feed: Feed | None  # None when loaded with read=None (the feed is only located)
    feed_path: Path
    feed_layout: FeedLayout
    rules: RuleSet
    registry: Registry
    registry_path: Path | None
    freq_ghz: float
    is_demo: bool  # the demo site, feed or registry is in use (however named): the banner shows
    notes: tuple[str, ...]
    model: SiteModel | None = None  # None: rules and error budget only
    demo_feed: bool = False  # the feed is the bundled demo feed: evaluate at its last sample by default

    def require_feed(self) -> Feed:
        """The feed as read (``load_inputs`` with ``read="tail"`` or ``"whole"``)."""
        if self.feed is None:
            raise RuntimeError("the feed was located but not read (load_inputs(read=None))")
        return self.feed

    @property
    def odds(self):
        """The site model's odds function for :func:`advisor.evaluation.evaluate.evaluate`, or None (rules only)."""
        return self.model.odds if self.model is not None else None


FeedRead = Literal["tail", "whole"] | None


def load_inputs(request: Request, read: FeedRead = "tail", with_model: bool = True) -> Inputs:
    """Site, feed, rules, registry and model for ``request``.

    ``read``: ``"tail"`` reads at most the feed's last part (enough for an instant's call),
    ``"whole"`` the whole file, ``None`` only locates it (the caller reads it).
    """
    from advisor.io.yamlcache import load_yaml_cached

    site = load_site(request.site_path, read_yaml=load_yaml_cached)  # parsed once per content of the file
    if request.session_hours is not None:
        site = replace(site, thresholds=replace(site.thresholds, session_hours=request.session_hours))
    if request.elevation_deg is not None:  # the session's elevation for this command line
        site = replace(site, session=replace(site.session, elevation_deg=request.elevation_deg))
    notes: list[str] = []
    if request.feed_path is not None:
        path = request.feed_path
        if request.site_path is None:
            notes.append(
                f"No site given (--site, ${SITE_ENV} or {config_site_path()}): using the demo site's "
                "location and figures."
            )
    elif site.feed.path is not None:
        path = site.feed.path
    else:
        raise UsageError(
            "no feed given and the site file names none",
            field="--feed",
            hint="pass --feed FILE or set feed.path in the site file",
        )
    registry_path = request.references_path or site.references_path
    demo_feed = is_demo_file(path)
    is_demo = site.is_demo or demo_feed or is_demo_file(registry_path)
    layout = feed_layout(site, request.feed_path is not None and not demo_feed)
    feed = None
    if read is not None:
        feed = read_feed(
            path,
            layout,
            tail_bytes=CHECK_TAIL_BYTES if read == "tail" else None,
            issue_time_column=site.forecast.issue_time_column,
        )
        note = check_feed_zone(feed, site, layout)
        if note:
            notes.append(note)
        layout = layout.as_read(feed.quality.sources)  # messages name the columns actually read
        site = replace(site, feed=layout)
    registry = read_registry(registry_path)
    rules = load_ruleset(site, request.rule_files)
    model = (
        model_for(request.model, site, notes, demo_model_on_other_feed=site.is_demo and not demo_feed)
        if with_model
        else None
    )
    return Inputs(
        site,
        feed,
        path,
        layout,
        rules,
        registry,
        registry_path,
        request.freq_ghz,
        is_demo,
        tuple(notes),
        model,
        demo_feed,
    )


def check_feed_zone(feed: Feed, site: Site, layout: FeedLayout) -> str | None:
    """The feed's irradiance against the computed sun (:func:`advisor.evaluation.feedcheck.check_time_zone`).

    A clear contradiction that another time zone resolves is refused (exit 2, naming the zone
    that fits); a weaker one is a warning on stderr and a note in the call.
    """
    from advisor.evaluation.feedcheck import check_time_zone

    zone = check_time_zone(
        feed.frame,
        site.latitude_deg,
        site.longitude_deg,
        layout.time_label,
        layout.time_zone if layout.time_zone is not None else None,
    )
    if zone.status == "refuse":
        raise FeedError(
            f"the feed's irradiance contradicts the computed sun: {zone.message}",
            source=feed.source,
            field="time zone",
            hint="fix feed.time_zone in the site file (or the logger's clock); 'advisor feed inspect' shows the check",
        )
    if zone.status == "warn":
        text = f"Time zone doubtful: {zone.message}."
        print(f"advisor: warning: {feed.source}: {text}", file=sys.stderr)
        return text
    return None


def evaluation_time(inputs: Inputs, at: TimeOption | None, frame: pd.DataFrame | None = None) -> pd.Timestamp:
    """The instant to evaluate: ``at`` when given; else the demo feed's last observation; else now.

    ``frame`` is the feed (plus forecast) being evaluated, by default the inputs' feed. Now is
    refused when the feed's observations run past it: the logger clock or time zone is wrong.
    """
    if at is not None:
        return at.resolve(inputs.site.time_zone)
    if frame is None and inputs.feed is not None:
        frame = inputs.feed.frame
    times = frame["time"] if frame is not None else pd.Series([], dtype="datetime64[ns, UTC]")
    observed = times[frame["kind"] == "observed"] if frame is not None else times
    if inputs.demo_feed and len(times):
        return pd.Timestamp(observed.iloc[-1] if len(observed) else times.iloc[0])
    now = pd.Timestamp.now(tz="UTC")
    if len(observed) and pd.Timestamp(observed.iloc[-1]) > now + FUTURE_TOLERANCE:
        raise FeedError(
            f"observed rows run until {observed.iloc[-1]:%Y-%m-%dT%H:%M}Z, after the current time",
            source=inputs.feed.source if inputs.feed is not None else None,
            hint="check the logger clock and time zone, or pass --at for a past instant",
        )
    return now


# --------------------------------------------------------------------------- the call at one instant


@dataclass(frozen=True)
class CheckResult:
    """One evaluated instant: the decisions, the explained call, its rendering context and exit status."""

    call: Call
    ctx: Context
    status: int
    inputs: Inputs
    decisions: Decisions


def _quality(inputs: Inputs, call: Call) -> dict:
    """The feed's quality summary for the JSON and the panel."""
    feed = inputs.require_feed()
    quality = feed.quality.as_dict()
    age = call.features.get("data_age_min")
    quality.update(
        {
            "source": feed.source,
            "data_age_min": None if age is None or math.isnan(age) else round(float(age), 2),
            "ok": bool(call.features.get("data_ok")),
            "inputs_not_seen": list(call.unseen_inputs),
        }
    )
    return quality


def with_site_forecast(
    inputs: Inputs, request: Request, notes: list[str], forecast_path: Path | None = None
) -> tuple[pd.DataFrame, str | None]:
    """The feed's frame combined with a forecast file, and the forecast's source (None without one).

    ``forecast_path`` names a file explicitly; else the site's ``forecast.path`` is read when the
    site's own feed is (a feed named with ``--feed`` may be another site's).  A forecast that
    cannot be read leaves the call on the feed alone, said in ``notes`` and on stderr.
    """
    from advisor.evaluation.outlook import combine_frames

    feed = inputs.require_feed()
    site = inputs.site
    path = forecast_path or (site.forecast.path if request.feed_path is None else None)
    if path is None:
        return feed.frame, None
    try:
        fc = read_feed(
            path,
            feed_layout(site, named_on_command_line=forecast_path is not None),
            issue_time_column=site.forecast.issue_time_column,
        )
    except AdvisorError as exc:
        if forecast_path is not None:
            raise
        print(f"advisor: warning: forecast not read: {exc.one_line()}", file=sys.stderr)
        notes.append(f"Forecast not read ({exc.one_line()}): nothing is said about the hours ahead.")
        return feed.frame, None
    return combine_frames(feed.frame, fc.frame), fc.source


def make_context(
    site: Site,
    feed_source: str,
    is_demo: bool,
    data_quality: dict,
    next_window: dict | None = None,
    notes=(),
    look_ahead: dict | None = None,
) -> Context:
    """The rendering context of a result, with every text from a file or argument made safe to print.

    Site names, feed paths, notes (which may quote a file) and the data-quality texts pass
    through :func:`advisor.text.clean_text`: no escape sequence or control character from a
    file reaches a terminal, a page or cron mail.
    """
    from advisor.text import clean_text
    from advisor.views.context import Context

    quality = {k: clean_text(v) if isinstance(v, str) else v for k, v in data_quality.items()}
    return Context(
        site_name=clean_text(site.name),
        time_zone=site.time_zone,
        feed_source=clean_text(feed_source),
        is_demo=is_demo,
        data_quality=quality,
        next_window=next_window,
        notes=tuple(clean_text(n) for n in notes),
        look_ahead=look_ahead,
    )


def run_check(request: Request) -> CheckResult:
    """Load the inputs, evaluate at the evaluation time and explain (``check``, ``tick``, ``rules explain``).

    The site's forecast file (when it names one and its own feed is read) gives the next window,
    until when a postpone lasts and how long a correction holds.
    """
    from advisor.evaluation.instant import evaluate_instant
    from advisor.vocabulary import EXIT_CODES

    inputs = load_inputs(request, read="tail")
    at = evaluation_time(inputs, request.at)
    feed = inputs.require_feed()
    notes = list(inputs.notes)
    frame, forecast_source = with_site_forecast(inputs, request, notes)
    instant = evaluate_instant(
        frame,
        at,
        inputs.site,
        inputs.registry,
        inputs.rules,
        inputs.freq_ghz,
        inputs.odds,
        forecast_source=forecast_source,
    )
    if instant.next_window_in_hindsight:
        notes.append("Next window found in observations after the evaluation time (hindsight).")
    postpone = (instant.look_ahead or {}).get("postpone") or {}
    if postpone and postpone.get("until") != "window":  # no next-window line says until when: a note does
        notes.extend(r.message for r in instant.call.reasons if r.rule == "postpone.until")
    ctx = make_context(
        inputs.site,
        feed.source + (f" + {forecast_source}" if forecast_source else ""),
        inputs.is_demo,
        _quality(inputs, instant.call),
        instant.next_window,
        notes,
        look_ahead=instant.look_ahead,
    )
    return CheckResult(instant.call, ctx, EXIT_CODES[instant.call.verdict], inputs, instant.decisions)


def empty_feed(source: str) -> Feed:
    """A canonical feed with no rows (the feed file could not be read)."""
    from advisor.io.feed import canonical_frame

    # A one-row canonical table gives the frame its columns and dtypes; the row is dropped.
    table = pd.DataFrame(
        {
            "time": ["2000-01-01T00:00:00Z"],
            "wind_mean_ms": [0.0],
            "wind_gust_ms": [0.0],
            "air_temp_c": [0.0],
            "rel_humidity_pct": [50.0],
        }
    )
    frame = canonical_frame(table, FeedLayout()).frame.iloc[:0]
    return Feed(frame=frame, quality=FeedQuality(0, 0, 0, 0, 0, 0, None, None), source=source)


def check_without_feed(request: Request, error: AdvisorError) -> CheckResult:
    """The undetermined call when the feed itself cannot be read, with the reason why (``tick``).

    Site, rules and registry are loaded as for :func:`run_check` (their errors still stop the
    command); the site model is not consulted, since there is no weather to give odds on.
    """
    from advisor.evaluation.instant import evaluate_without_weather
    from advisor.vocabulary import EXIT_CODES

    located = load_inputs(request, read=None, with_model=False)
    source = str(located.feed_path)
    feed = empty_feed(source)
    inputs = replace(located, feed=feed, is_demo=False, notes=())
    at = evaluation_time(inputs, request.at)
    instant = evaluate_without_weather(
        feed.frame,
        at,
        inputs.site,
        inputs.registry,
        inputs.rules,
        inputs.freq_ghz,
        f"The weather feed cannot be read: {error.one_line()}",
    )
    quality = feed.quality.as_dict()
    quality.update({"source": source, "data_age_min": None, "ok": False, "error": error.one_line()})
    ctx = make_context(inputs.site, source, False, quality)
    return CheckResult(instant.call, ctx, EXIT_CODES[instant.call.verdict], inputs, instant.decisions)
