"""The report's HTML: ``page.html`` (a :class:`string.Template`) filled with escaped fragments.

Plain HTML and CSS, no script: it opens from the file system in any browser, reads on a
laptop screen and prints (a print style sheet drops the page's backgrounds and keeps each
shot on one page where it fits). Pictures are linked by paths relative to the page, so the
report and its ``report/`` folder travel with the output folder.
"""

from __future__ import annotations

import html
import math
import time
from dataclasses import dataclass, field
from importlib import resources
from string import Template

from framestyle.qc.flash_check import CAUTION, report_lines, verdict_line
from framestyle.report.status import RenderStatus, ShotSeries
from framestyle.settings import Settings


@dataclass(frozen=True)
class ShotView:
    """One shot as the page shows it."""

    index: int
    frames: str  # "1001-1047", the source's numbers
    timecode: str  # "00:00:41:17 – 00:00:43:15"
    length: int
    series: ShotSeries | None  # None: no frame rendered yet
    look: str  # how the shot's look differs from the render's, in words ("" if it does not)
    strip: str | None = None  # relative URL of the thumbnail strip
    plot: str | None = None  # relative URL of the plot
    render_label: str = "render"  # what the render's warping error was measured on
    flashes: dict = field(default_factory=dict)  # the shot's flash check: "render"/"source" → report
    picture: str = ""  # "WxH+X+Y": the picture inside black bars that was stylised ("" the whole frame)


@dataclass(frozen=True)
class PageData:
    """Everything the page says; URLs are relative to the page."""

    heading: str
    version: str
    updated: float  # seconds since the epoch
    status: RenderStatus | None = None  # None: the folder holds a preview only
    shots: tuple[ShotView, ...] = ()
    settings: dict | None = None  # the manifest's settings
    styles: tuple[tuple[str, str], ...] = ()  # (style file name, thumbnail URL)
    source: dict = field(default_factory=dict)  # what the source is, in words: label → text
    environment: dict = field(default_factory=dict)  # library versions
    products: tuple[str, ...] = ()  # videos made, relative URLs
    flashes: dict = field(default_factory=dict)  # the whole render's flash check: "render"/"source" → report
    flash_plot: str | None = None  # relative URL of the flash timeline
    previews: tuple[str, ...] = ()  # contact sheets, relative URLs
    idle: bool = False  # looked for, and no process renders the render's shots now


def render_page(data: PageData) -> str:
    """The report page for ``data``, as HTML text."""
    template = Template(resources.files(__package__).joinpath("page.html").read_text(encoding="utf-8"))
    return template.substitute(
        title=_e(f"{data.heading} · framestyle report"), heading=_e(data.heading), version=_e(data.version),
        updated=_e(_clock(data.updated)), status=_status(data), shots_table=_shots_table(data), look=_look(data),
        flashes=_flashes(data), shot_sections="\n".join(_shot_section(s) for s in data.shots),
        preview=_previews(data),
    )


# --- fragments ----------------------------------------------------------------------------------

def _status(data: PageData) -> str:
    status = data.status
    if status is None:
        return ('<section><h2>Status</h2><p>No render in this folder yet: a preview only. '
                '<code>framestyle stylise</code> with the same <code>--out</code> starts the render.</p></section>')
    share = status.frames_done / status.frames_total if status.frames_total else 0.0
    elapsed = status.elapsed
    if status.complete:
        eta, eta_note = "done", f"finished {_clock(status.last_finished)}" if status.last_finished else ""
    elif data.idle:
        eta, eta_note = "stopped", "no process renders it now; `framestyle resume` of this folder continues it"
    elif status.eta_seconds is None:
        eta, eta_note = "—", "after the first frame"
    else:
        eta, eta_note = _duration(status.eta_seconds), f"at {status.seconds_per_frame:.1f} s a frame"
    last = f"last frame {_clock(status.last_finished)}" if status.last_finished else ""
    cards = [
        ("frames", f"{status.frames_done} / {status.frames_total}", f"{share:.0%}"),
        ("shots done", f"{status.shots_done} / {status.shots_total}", ""),
        ("elapsed", _duration(elapsed) if elapsed is not None else "—",
         f"from {_clock(status.started)} to the last frame" if status.started else ""),
        ("time left", eta, eta_note),
        ("solver time", _duration(status.render_seconds), last),
    ]
    videos = "".join(f'<li><a href="{_e(url)}">{_e(url)}</a></li>' for url in data.products)
    return ("<section><h2>Status</h2><div class=\"cards\">"
            + "".join(f'<div class="card"><div class="label">{_e(label)}</div><div class="value">{_e(value)}</div>'
                      f'<div class="note">{_e(note)}</div></div>' for label, value, note in cards)
            + f'</div><div class="bar" title="{share:.0%} of the frames"><span style="width: {100 * share:.1f}%"></span></div>'
            + (f"<p>Videos of the frames:</p><ul>{videos}</ul>" if videos else "") + "</section>")


def _state(view: ShotView) -> str:
    done = view.series.frames_done if view.series else 0
    if done == view.length:
        return '<span class="state done">done</span>'
    if done:
        return f'<span class="state partial">{done} of {view.length}</span>'
    return '<span class="state todo">not started</span>'


def _shots_table(data: PageData) -> str:
    if not data.shots:
        return ""
    checked = any(view.flashes for view in data.shots)  # shots are checked one by one on a farm
    rows = []
    for view in data.shots:
        s = view.series
        render, source = (s.mean_error("render"), s.mean_error("source")) if s else (math.nan, math.nan)
        rows.append(
            f'<tr><td><a href="#shot{view.index}">{view.index}</a></td><td>{_e(view.frames)}</td>'
            f'<td>{_e(view.timecode)}</td><td>{_state(view)}</td>'
            f'<td class="num">{_duration(s.render_seconds) if s else "—"}</td>'
            f'<td class="num">{_number(s.iterations_per_frame, ".1f") if s else "—"}</td>'
            f'<td class="num">{_number(render, ".5f")}</td><td class="num">{_number(source, ".5f")}</td>'
            + (f'<td>{_verdict(view.flashes.get("render"))}</td>' if checked else "") + "</tr>")
    return ('<section><h2>Shots</h2><table><thead><tr><th>shot</th><th>frames</th><th>timecode</th><th>state</th>'
            '<th class="num">solver time</th><th class="num">iterations / frame</th>'
            '<th class="num">warping error</th><th class="num">source\'s own</th>'
            + ("<th>flash check</th>" if checked else "") + "</tr></thead><tbody>" + "".join(rows)
            + "</tbody></table></section>")


def _look(data: PageData) -> str:
    if data.settings is None:
        return ""
    defaults = Settings().to_dict()
    styles = "".join(f'<figure><img src="{_e(url)}" alt="style image {_e(name)}"><figcaption>{_e(name)}</figcaption>'
                     f'</figure>' for name, url in data.styles)
    items = "".join(
        f'<div><span class="key">{_e(key)}</span><span class="{"changed" if value != defaults.get(key) else ""}">'
        f'{_e(_value(value))}</span></div>'
        for key, value in data.settings.items() if key not in ("styles", "shot_looks"))
    looks = "".join(f"<li>shot {_e(view.index)}: {_e(view.look)}</li>" for view in data.shots if view.look)
    source = "".join(f"<tr><th>{_e(k)}</th><td><code>{_e(v)}</code></td></tr>" for k, v in data.source.items())
    versions = ", ".join(f"{k} {v}" for k, v in data.environment.items())
    return (f'<section><h2>Look and settings</h2><div class="styles">{styles}</div>'
            + (f"<h3>Shots with their own look</h3><ul>{looks}</ul>" if looks else "")
            + f'<h3>Settings <span class="muted">(bold: changed from the default)</span></h3>'
            f'<div class="settings">{items}</div>'
            f"<h3>Source</h3><table>{source}</table>"
            f'<h3>Versions</h3><p class="muted">{_e(versions)}</p></section>')


def _flashes(data: PageData) -> str:
    # A finished render is checked as it finishes; without the render's record (deleted,
    # damaged) the source's "pass" must not stand in for it.
    unchecked = data.status is not None and data.status.complete and "render" not in data.flashes
    if not data.flashes and not unchecked:
        return ""
    details = "".join(f"<li>{_verdict(report)}<ul>{_lines(report_lines(kind, report))}</ul></li>"
                      for kind, report in data.flashes.items())
    if unchecked:
        details = ('<li><span class="fail">render: not checked</span> (its flash record is missing or unreadable; '
                   "<code>framestyle resume</code> on this folder checks it again)</li>" + details)
    plot = (f'<figure><img class="plot" src="{_e(data.flash_plot)}" alt="flash check timeline">'
            f"<figcaption>Flashes in the trailing second and the flashing area, against time.</figcaption></figure>"
            if data.flash_plot else "")
    return (f"<section><h2>Flash check of the whole render</h2><ul>{details}</ul>{plot}"
            f'<p class="muted">{_e(CAUTION)}</p></section>')


def _verdict(report: dict | None) -> str:
    """A flash check's verdict in a coloured word or line; a dash without a check."""
    if report is None:
        return "—"
    line = verdict_line(report)
    return f'<span class="{"pass" if line == "pass" else "fail"}">{_e(line)}</span>'


def _lines(lines: list[str]) -> str:
    return "".join(f"<li>{_e(line.strip())}</li>" for line in lines)


def _shot_section(view: ShotView) -> str:
    head = (f'<section class="shot" id="shot{view.index}"><h2>Shot {view.index} · frames {_e(view.frames)} '
            f'<span class="muted">· {_e(view.timecode)}</span> {_state(view)}</h2>')
    look = f'<p>Own look: {_e(view.look)}</p>' if view.look else ""
    if view.picture:
        look += f"<p>Black bars kept as the footage has them; the picture {_e(view.picture)} is stylised.</p>"
    if view.flashes:
        look += ("<p>Flash check of this shot: " + " · ".join(f"{_e(kind)} {_verdict(report)}"
                                                             for kind, report in view.flashes.items()) + "</p>")
    if view.series is None or not view.series.frames_done:
        return head + look + '<p class="muted">Not rendered yet.</p></section>'
    strip = (f'<figure><img class="wide" src="{_e(view.strip)}" alt="shot {view.index}: source above render">'
             f"<figcaption>Source (top) and render (bottom), labelled by source frame.</figcaption></figure>"
             if view.strip else "")
    plot = (f'<figure><img class="plot" src="{_e(view.plot)}" alt="shot {view.index}: per-frame figures">'
            f"<figcaption>Per frame: the warping error of the {_e(view.render_label)} and of the source "
            f"(Lai et al. 2018), the solver's iterations and the seconds the frame took.</figcaption></figure>"
            if view.plot else "")
    return head + look + strip + plot + "</section>"


def _previews(data: PageData) -> str:
    if not data.previews:
        return ""
    sheets = "".join(f'<figure><img class="wide" src="{_e(url)}" alt="preview contact sheet">'
                     f"<figcaption>{_e(url)}</figcaption></figure>" for url in data.previews)
    return ("<section><h2>Preview</h2><p class=\"muted\">Every Nth frame of each shot, each stylised on its own "
            f"(no temporal chain), source above render.</p>{sheets}</section>")


# --- formatting ---------------------------------------------------------------------------------

def _e(value) -> str:
    return html.escape(str(value))


def _clock(epoch: float | None) -> str:
    return time.strftime("%Y-%m-%d %H:%M:%S", time.localtime(epoch)) if epoch else "—"


def _duration(seconds: float) -> str:
    """``"2 h 05 min"``, ``"4 min 07 s"``, ``"12.3 s"``."""
    if seconds < 60:
        return f"{seconds:.1f} s"
    minutes, secs = divmod(round(seconds), 60)
    if minutes < 60:
        return f"{minutes} min {secs:02d} s"
    hours, minutes = divmod(minutes, 60)
    return f"{hours} h {minutes:02d} min"


def _number(value: float, spec: str) -> str:
    return "—" if math.isnan(value) else format(value, spec)


def _value(value) -> str:
    if isinstance(value, list):
        return ", ".join(map(str, value)) or "—"
    return "—" if value in (None, "") else str(value)

