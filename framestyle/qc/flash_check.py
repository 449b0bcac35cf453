"""The photosensitive flash check as users meet it: on a clip, on a render, in words.

:mod:`framestyle.qc.flashes` analyses frames; this module feeds it what a user points at —
a folder of numbered frames, a video file, or a render's output folder (its delivered frames
and the source they were made from, read through the manifest) — records the render's check
through :class:`framestyle.store.Store`, and says what it found: a verdict per standard
(W3C WCAG 2.1 SC 2.3.1, 25 % of any 10° field; ITU-R BT.1702, 25 % of the screen), the worst
seconds with their timecode and flashing area, and a warning that says where a render
flashes and whether its source already does.

Frames are judged as shown: linear-light (EXR) frames are sRGB-encoded first, as for the
network (:func:`framestyle.finish.compose.to_display`).

A render is checked as a whole once every frame is finished (a flash can straddle a cut,
so this check is the authoritative one); on a render farm each shot is also checked as it
finishes, so a long farmed render warns early (a shot's check sees only its own frames).
"""

from __future__ import annotations

import dataclasses
import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from pathlib import Path

from framestyle import io
from framestyle.errors import FramestyleError
from framestyle.finish.compose import to_display
from framestyle.qc.flashes import AREA_LIMIT, KINDS, MAX_FLASHES, STANDARDS, FlashReport, analyse_flashes
from framestyle.settings import Settings
from framestyle.shots import Shot
from framestyle.shots.cutlists import clip_timecode
from framestyle.store import FLASH_PLOT, MANIFEST, Store, check_footage, output_names
from framestyle.timecode import MAX_FPS, ClipTimecode

CAUTION = ("The flash check is an aid, not a certification: broadcasters' rules and local regulators "
           "prevail. It models the display as sRGB relative luminance (no HDR, no cd/m²).")


@dataclass(frozen=True)
class FlashCheck:
    """The flash check of what a user pointed at.

    ``reports`` holds ``"frames"`` for a clip (folder or video), ``"render"`` and ``"source"``
    for a render's output folder. The verdict that gates a delivery is the clip's, or the
    render's (the source is shown for comparison).
    """

    path: Path
    reports: dict[str, FlashReport]

    @property
    def judged(self) -> str:
        """The label of the report the verdict follows."""
        return "render" if "render" in self.reports else "frames"

    @property
    def passed(self) -> bool:
        return self.reports[self.judged].passed

    def to_dict(self) -> dict:
        """JSON-ready: the path, the verdict and every report (:meth:`FlashReport.to_dict`)."""
        return {"path": str(self.path), "judged": self.judged, "passed": self.passed,
                "reports": {label: report.to_dict() for label, report in self.reports.items()},
                "caution": CAUTION}


# --- analysing what a user points at ---------------------------------------------------------

def check_path(path: Path, fps: float | None = None, source_path: Path | None = None) -> FlashCheck:
    """Check a folder of numbered frames, a video file, or a render's output folder.

    Parameters
    ----------
    path : the clip, or an output folder (one holding a render's manifest)
    fps : the frame rate of the 1-second windows and timecode, replacing the clip's own (a
        folder's default is :data:`framestyle.io.source.FOLDER_FPS`) or the render's
    source_path : a render's footage, where it moved since the render (default: where the
        render read it, from its manifest)

    Raises
    ------
    FramestyleError
        Naming the file: not found, not a clip, unreadable frames, an unfinished render, or
        a bad frame rate.
    """
    path = Path(path)
    if fps is not None and not (math.isfinite(fps) and 0 < fps <= MAX_FPS):
        raise FramestyleError(f"--fps {fps}: must be a frame rate above 0 and at most {MAX_FPS:g}")
    manifest = Store(path).manifest() if path.is_dir() else None
    if manifest is None:
        source = io.open_source(path)
        return FlashCheck(path, {"frames": analyse_source(source, io.source_timecode(source, fps))})
    settings = Settings.from_dict(manifest["settings"], str(path / MANIFEST))
    if fps is not None:
        settings = dataclasses.replace(settings, fps=fps)
    footage = Path(source_path or manifest["inputs"]["input"])
    if not footage.exists():
        raise FramestyleError(f"{footage}: the footage of the render in {path} is not there; give --source "
                              f"if it moved")
    source = io.open_source(footage)
    check_footage(manifest, source, path)
    shot_file = manifest["shot_list"]["file"]
    timecode = clip_timecode(source, settings, Path(shot_file) if shot_file else None)
    names = output_names(source)
    finished = Store(path).finished()
    missing = [name for name in names if name not in finished]
    if missing:
        raise FramestyleError(f"{path}: the render is unfinished ({len(names) - len(missing)} of {len(names)} "
                              f"frames, {missing[0]} missing); finish it with `framestyle resume {path}`")
    return FlashCheck(path, analyse_render(Store(path).frame_paths(names), source, timecode))


def analyse_source(source: io.FrameSource, timecode: ClipTimecode, shot: Shot | None = None) -> FlashReport:
    """The flash report of a source's frames (or one shot's), labelled by ``timecode``."""
    start, stop = (0, source.count) if shot is None else (shot.start, shot.end + 1)
    frames = (to_display(frame, source.linear) for _, frame in io.iter_frames(source, start, stop))
    return analyse_flashes(frames, timecode.fps, timecode=lambda k: timecode.label(start + k))


def analyse_render(paths: Sequence[Path], source: io.FrameSource, timecode: ClipTimecode,
                   shot: Shot | None = None) -> dict[str, FlashReport]:
    """``{"render": ..., "source": ...}``: the delivered frames ``paths`` of the whole clip
    (or of ``shot``) and the same frames of the source."""
    start = 0 if shot is None else shot.start
    frames = (to_display(io.read_image(p), source.linear) for p in paths)
    render = analyse_flashes(frames, timecode.fps, timecode=lambda k: timecode.label(start + k))
    return {"render": render, "source": analyse_source(source, timecode, shot)}


def write_plot(check: FlashCheck, path: Path | None = None) -> Path | None:
    """Draw ``check``'s timeline into ``path``; by default a render's goes into its output
    folder (``OUT/flashes.png``, through the store under the folder lock) and a clip's is not
    drawn. Returns where it went, or None."""
    if path is not None:
        from framestyle.qc.flash_plot import plot_flash_timeline  # matplotlib only when drawing

        _check_plot_path(check, Path(path))
        plot_flash_timeline(check.reports, path)
        return Path(path)
    if check.judged != "render":
        return None
    with Store(check.path).folder_lock() as store:
        return store.write_flash_plot(check.reports)


def _check_plot_path(check: FlashCheck, path: Path) -> None:
    """Refuse a plot path that would replace what was checked: the video itself, or an image
    among a clip's frames or a render's (a render's own ``flashes.png`` aside)."""
    clip, target = Path(check.path).resolve(), path.resolve()
    among_frames = (target.parent == clip and target.suffix.lower() in io.IMAGE_EXTS
                    and not (check.judged == "render" and target.name == FLASH_PLOT))
    if target == clip or among_frames:
        raise FramestyleError(f"{path}: the plot would land among the frames of {check.path}; write it elsewhere")


# --- the check a render records --------------------------------------------------------------

def record_render_check(store: Store, source: io.FrameSource, names: Sequence[str],
                        timecode: ClipTimecode) -> dict[str, dict]:
    """Check a finished render and its source; record both and draw ``OUT/flashes.png``.

    Call under the store's folder lock, once every frame is finished. Skipped (the records
    returned as they are) when the records and plot exist and no frame changed since
    (same count, same newest modification time). Returns ``{"render": ..., "source": ...}``
    as recorded (:meth:`FlashReport.to_dict`, the render's with a ``"frames_checked"`` key).
    """
    paths = store.frame_paths(names)
    checked = {"count": len(paths), "newest_ns": max((p.stat().st_mtime_ns for p in paths), default=0)}
    recorded = {kind: store.flash_check(kind) for kind in ("render", "source")}
    if (all(recorded.values()) and recorded["render"].get("frames_checked") == checked
            and store.flash_plot() is not None):
        return recorded
    reports = analyse_render(paths, source, timecode)
    recorded = {"render": {**reports["render"].to_dict(), "frames_checked": checked},
                "source": reports["source"].to_dict()}
    for kind, report in recorded.items():
        store.write_flash_check(kind, report)
    store.write_flash_plot(reports)
    return recorded


def record_shot_check(store: Store, source: io.FrameSource, names: Sequence[str], timecode: ClipTimecode,
                      shot: Shot) -> dict[str, dict]:
    """Check one finished shot's delivered frames and source frames and record both.

    Call under the shot's lock. Returns ``{"render": ..., "source": ...}`` as recorded.
    """
    reports = analyse_render(store.frame_paths(names[shot.start:shot.end + 1]), source, timecode, shot)
    recorded = {kind: report.to_dict() for kind, report in reports.items()}
    for kind, report in recorded.items():
        store.write_flash_check(kind, report, shot=shot.index)
    return recorded


# --- in words --------------------------------------------------------------------------------

def verdict_line(report: Mapping) -> str:
    """``"pass"``, or what fails, e.g. ``"fails WCAG 2.1 SC 2.3.1 (general, red flashes),
    ITU-R BT.1702 (general flashes)"``."""
    failing = [(standard, [k for k in KINDS if report["verdicts"][standard][k] == "fail"])
               for standard in STANDARDS]
    failing = [(standard, kinds) for standard, kinds in failing if kinds]
    if not failing:
        return "pass"
    names = {"wcag21": "WCAG 2.1 SC 2.3.1", "bt1702": "ITU-R BT.1702"}
    return "fails " + ", ".join(f"{names[s]} ({', '.join(kinds)} flashes)" for s, kinds in failing)


def report_lines(label: str, report: Mapping, worst: int = 3) -> list[str]:
    """The check of one report in a few lines: what was measured, a verdict per standard,
    the worst seconds with timecode and flashing area."""
    field_w, field_h = report["geometry"]["field_size"]
    lines = [f"{label}: {report['frames']} frames at {report['fps']:g} fps, {report['width']}×{report['height']} "
             f"(a 10° field is {field_w:.0f}×{field_h:.0f} px)"]
    covered = min(1.0, report["width"] / field_w) * min(1.0, report["height"] / field_h)
    if covered < 1.0:  # a strip of a picture: WCAG's field reaches past it onto the screen around it
        lines.append(f"  the picture fills {_percent(covered)} of a 10° field at most: WCAG's area counts the "
                     f"screen around it as steady (the picture fitted to a 1024×768 screen), BT.1702's screen is "
                     f"the picture; shown larger than that, judge it by BT.1702's area")
    for standard, text in STANDARDS.items():
        kinds = ", ".join(f"{kind} flashes {report['verdicts'][standard][kind]}" for kind in KINDS)
        lines.append(f"  {text}: {kinds}")
    seconds = report["worst_seconds"][:worst]
    if not seconds:
        lines.append(f"  no area flashed more than {MAX_FLASHES} times in any second")
    def against(fraction: float, standard: str) -> str:  # each standard limits its own area
        return f"{'over' if fraction > AREA_LIMIT else 'within'} {standard}'s {_percent(AREA_LIMIT)}"

    for w in seconds:
        lines.append(f"  second from {w['timecode']}: {w['kind']}, {w['flashes']} flashes, "
                     f"{_percent(w['field_fraction'])} of a 10° field ({against(w['field_fraction'], 'WCAG')}), "
                     f"{_percent(w['screen_fraction'])} of the screen ({against(w['screen_fraction'], 'BT.1702')})")
    return lines


def flash_warning(reports: Mapping[str, Mapping], what: str = "the render") -> str | None:
    """A warning where the delivered frames fail: where they flash, and whether the source
    already does. None when the render passes."""
    render, source = reports["render"], reports["source"]
    if render["passed"]:
        return None
    where = ", ".join(f"{w['timecode']} ({w['kind']}, {_percent(w['field_fraction'])} of a 10° field)"
                      for w in _failing_seconds(render))
    if source["passed"]:
        origin = "the source passes, so the stylisation adds these flashes"
    else:
        times = ", ".join(w["timecode"] for w in _failing_seconds(source))
        origin = f"the source already flashes ({times})"
    return (f"{what} {verdict_line(render)}: it flashes in the second(s) from {where}; {origin}. "
            f"Photosensitive viewers are at risk; soften or slow the flashing before publishing")


def preview_warning(source: Mapping) -> str | None:
    """A warning where the source of a preview fails (previews are stylised frame by frame
    and sampled, so their own frames say nothing about a render's flashes). None when it passes."""
    if source["passed"]:
        return None
    times = ", ".join(w["timecode"] for w in _failing_seconds(source))
    return (f"the source {verdict_line(source)} (the second(s) from {times}): a render of it will likely flash "
            f"too; `framestyle flashes OUT` checks the render")


def _percent(fraction: float) -> str:
    """``"56 %"``; a share under 1 % keeps a decimal, so a single flashing block is not "0 %"."""
    return f"{100 * fraction:.0f} %" if fraction >= 0.01 or fraction == 0 else f"{100 * fraction:.1f} %"


def _failing_seconds(report: Mapping, most: int = 3) -> list[Mapping]:
    return [w for w in report["worst_seconds"]
            if max(w["field_fraction"], w["screen_fraction"]) > AREA_LIMIT][:most]
