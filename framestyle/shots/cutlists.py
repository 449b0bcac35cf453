"""Editors' cut lists in and out: CMX 3600 EDLs and OpenTimelineIO files.

An editor who already has the cut hands it over as an EDL or an OpenTimelineIO (``.otio``)
file from their editing software; framestyle reads each event as one shot and writes its
own shots back the same way for the editing software. Both formats are read and written
with the ``opentimelineio`` library (its ``otio_json`` adapter and the ``cmx_3600`` adapter
plugin), never parsed by hand here.

Reading: an event's *record* range (where it sits in the edit) is laid on the clip's
frames through the clip's timecode (:class:`~framestyle.timecode.ClipTimecode`): the frame
at position k carries the label ``start + k``. A clip with no start timecode of its own
(a folder of frames, a video without a timecode tag) starts at the cut's first record
timecode, so a cut whose record starts at 01:00:00:00 fits a clip that was exported from
it. The events must then cover the clip's frames exactly, without gaps.

Writing: one event per shot, its source range the shot's frames labelled by the clip's
timecode and its record range the same (the shots laid end to end from the clip's start
timecode), the clip and reel named after the input.
"""

from __future__ import annotations

import copy
import os
import re
from pathlib import Path
from typing import TYPE_CHECKING, Sequence

import opentimelineio as otio

from framestyle import io
from framestyle.atomic import write_bytes
from framestyle.errors import FramestyleError
from framestyle.shots.shot import Shot, check_contiguous
from framestyle.timecode import ClipTimecode, exact_rate, frame_to_timecode, ntsc_nominal

if TYPE_CHECKING:
    from framestyle.settings import Settings

# OpenTimelineIO adapters by file extension; an EDL is CMX 3600, the common interchange
# layout (the cmx_3600 adapter is a plugin package since OpenTimelineIO 0.16).
_ADAPTERS = {".edl": "cmx_3600", ".otio": "otio_json"}
_KIND = {"cmx_3600": "CMX 3600 EDL", "otio_json": "OpenTimelineIO file"}
_TIMECODE = re.compile(r"\b(\d\d:\d\d:\d\d)[:;.,](\d\d)\b")  # HH:MM:SS then the frames' separator
# The cmx_3600 adapter's error for an event out of record order or overlapping the one before.
_OVERLAP = re.compile(r"Overlapping record in value: (\S+)")


def cut_list_adapter(path: str | os.PathLike) -> str | None:
    """The OpenTimelineIO adapter that reads ``path``, or None if it is not a cut list.

    By extension (``.edl``, ``.otio``), else by content: an EDL starts with its ``TITLE:``
    line (CMX 3600), an OpenTimelineIO file is JSON naming an ``OTIO_SCHEMA``.
    """
    path = Path(path)
    if path.suffix.lower() in _ADAPTERS:
        return _ADAPTERS[path.suffix.lower()]
    try:
        with open(path, encoding="utf-8-sig", errors="replace") as handle:
            head = handle.read(4096).lstrip()
    except OSError:
        return None  # the shot-list reader reports the file it cannot read
    if head.startswith("TITLE:"):
        return "cmx_3600"
    if head.startswith("{") and '"OTIO_SCHEMA"' in head:
        return "otio_json"
    return None


def read_cut_list(path: str | os.PathLike, timecode: ClipTimecode, count: int) -> list[int]:
    """Read an EDL or OpenTimelineIO cut of a clip; return the shot starts as 0-based positions.

    Each event (clip) of the cut's one video track is a shot; transitions count as cuts at
    their edit point. An event's record range is placed on the clip through the clip's
    timecode, or through :func:`cut_list_timecode` when the clip has none (see the module
    notes); an EDL is read at the clip's rate, as EDLs do not state one.

    Parameters
    ----------
    path : str or os.PathLike
        The ``.edl`` (CMX 3600) or ``.otio`` file.
    timecode : ClipTimecode
        The clip's rate and start timecode.
    count : int
        The clip's number of frames.

    Returns
    -------
    list[int]
        Strictly increasing shot starts, the first 0.

    Raises
    ------
    FramestyleError
        One line naming the file: unreadable, not one video track, no events, a gap
        between events, a rate other than the clip's, or events that start before or
        after the clip's first frame or end before or after its last.

    References
    ----------
    CMX 3600 EDL layout (event, reel, channel, transition, source in/out, record in/out);
    OpenTimelineIO 0.18 documentation, "Timeline Structure" and "Time Ranges".
    """
    events = _record_ranges(path, timecode)
    first = events[0][0] if timecode.start is None else timecode.first
    clip = f"{_label(first, timecode)}-{_label(first + count - 1, timecode)}, {count} frames"
    if events[0][0] != first:
        raise FramestyleError(f"{path}: the cut starts at {_label(events[0][0], timecode)} but the clip's first"
                              f" frame is {_label(first, timecode)} (clip {clip}); if the clip is this cut with "
                              f"another timecode, give --start-timecode {_label(events[0][0], timecode)}")
    if events[-1][1] != first + count:
        longer = "longer" if events[-1][1] > first + count else "shorter"
        raise FramestyleError(f"{path}: the cut ({events[-1][1] - first} frames, to"
                              f" {_label(events[-1][1] - 1, timecode)}) is {longer} than the clip ({clip})")
    return [record_in - first for record_in, _ in events]


def cut_list_timecode(path: str | os.PathLike, timecode: ClipTimecode) -> ClipTimecode:
    """The clip's timecode as a cut list places it: its own, or from the cut's first record timecode.

    A clip without a start timecode of its own (``timecode.start`` None) is read as the cut
    exported, starting at the first event's record timecode (often 01:00:00:00), so tables
    and cut lists written back label its frames as the editor's timeline does, counting drop-
    or non-drop-frame as the cut does (:func:`_cut_drop_frame`).

    Raises
    ------
    FramestyleError
        As :func:`read_cut_list`, for a cut list that cannot be read.
    """
    if timecode.start is not None:
        return timecode
    first = _record_ranges(path, timecode)[0][0]
    return ClipTimecode(timecode.fps, frame_to_timecode(first, timecode.fps, _cut_drop_frame(path)))


def clip_timecode(source: io.FrameSource, settings: Settings, shot_file: Path | None = None) -> ClipTimecode:
    """How the source's frames are labelled: the settings' rate and start timecode, else the
    video's; an editor's cut list places a clip without timecode of its own."""
    timecode = io.source_timecode(source, settings.fps, settings.start_timecode)
    if shot_file is not None and cut_list_adapter(shot_file):
        timecode = cut_list_timecode(shot_file, timecode)
    return timecode


def _record_ranges(path: str | os.PathLike, timecode: ClipTimecode) -> list[tuple[int, int]]:
    """The events' record ranges (in, out exclusive) as frame counts from 00:00:00:00, checked."""
    adapter = cut_list_adapter(path) or "otio_json"
    rate = exact_rate(timecode.fps)
    kind = _KIND[adapter]
    options = {"rate": float(rate)} if adapter == "cmx_3600" else {}
    try:
        if adapter == "cmx_3600":  # as text: the header decides how its timecodes count
            text = Path(path).read_text(encoding="utf-8-sig", errors="replace")
            if ntsc_nominal(timecode.fps) not in (30, 60) and _edl_drop_frame(text):
                raise FramestyleError(f"{path}: the cut list counts drop-frame, which exists only at 29.97 and 59.94 "
                                      f"frames/s; the clip is at {timecode.fps:g}")
            timeline = otio.adapters.read_from_string(_edl_as_counted(text), adapter_name=adapter, **options)
        else:
            timeline = otio.adapters.read_from_file(str(path), adapter_name=adapter, **options)
    except OSError as exc:
        raise FramestyleError(f"{path}: cannot read the cut list ({exc.strerror or exc})") from None
    except (otio.exceptions.OTIOError, ValueError, KeyError) as exc:
        overlap = _OVERLAP.match(str(exc))
        if overlap:
            raise FramestyleError(f"{path}: the event recorded from {overlap[1]} starts before the event listed above "
                                  f"it ends; list the events in record order, without overlaps") from None
        raise FramestyleError(f"{path}: not a readable {kind} at {timecode.fps:g} frames/s ({exc})") from None
    except (AttributeError, TypeError, IndexError) as exc:  # the CMX 3600 reader trips on a line it cannot place
        raise FramestyleError(f"{path}: not a readable {kind}: OpenTimelineIO's reader failed ({exc}); give every "
                              f"event its own number (only a dissolve's two lines share one) in CMX 3600's "
                              f"columns") from None
    if not isinstance(timeline, otio.schema.Timeline):
        raise FramestyleError(f"{path}: holds a {type(timeline).__name__}, not a timeline")
    tracks = timeline.video_tracks()
    if not tracks:
        raise FramestyleError(f"{path}: the cut list has no video events")
    if len(tracks) > 1:
        raise FramestyleError(f"{path}: has {len(tracks)} video tracks; give a cut with one")
    offset = _frames(timeline.global_start_time, rate) if timeline.global_start_time is not None else 0
    events: list[tuple[int, int]] = []
    for item in tracks[0]:
        if isinstance(item, otio.schema.Transition):
            continue
        if isinstance(item, otio.schema.Stack):  # its own cuts would be lost in one event
            raise FramestyleError(f"{path}: holds a nested stack ({item.name or 'unnamed'}, a compound clip); "
                                  f"flatten it in the editing program and export the cut again")
        record = item.transformed_time_range(item.trimmed_range(), timeline.tracks)
        if exact_rate(record.duration.rate) != rate:
            raise FramestyleError(f"{path}: the cut is at {record.duration.rate:g} frames/s but the clip is at"
                                  f" {timecode.fps:g}")
        record_in = offset + _frames(record.start_time, rate)
        record_out = offset + _frames(record.end_time_exclusive(), rate)
        if isinstance(item, otio.schema.Gap):
            raise FramestyleError(f"{path}: no event from {_label(record_in, timecode)} to"
                                  f" {_label(record_out - 1, timecode)}; a cut list for shots has no gaps")
        if record_out > record_in:
            events.append((record_in, record_out))
    if not events:
        raise FramestyleError(f"{path}: the cut list has no video events")
    return events


def shots_timeline(shots: Sequence[Shot], timecode: ClipTimecode, name: str, media: str,
                   sequence: io.FrameSource | None = None) -> otio.schema.Timeline:
    """The shots as an OpenTimelineIO timeline: one clip per shot on one video track.

    Each clip's source range is the shot's frames at the clip's timecode (first frame =
    ``timecode.start``), and the timeline starts at that timecode too, so source and record
    timecodes agree. The clips are named ``name`` and refer to ``media``; each carries its
    shot number in ``metadata["framestyle"]["shot"]``.

    Parameters
    ----------
    shots : contiguous shots in 0-based positions
    timecode : the clip's rate and start timecode
    name : the input's name (the timeline's, the clips' and, shortened, the EDL reel name)
    media : the input's path, as the clips' media reference
    sequence : the input, when it is a folder of frames: the clips then refer to its frame
        files as an image sequence (``ImageSequenceReference``: prefix, number, suffix), which
        editing programs link to, where its names and numbering allow
    """
    check_contiguous(shots)
    if not name:
        raise ValueError("a cut list needs a name (its EDL TITLE)")
    rate = float(exact_rate(timecode.fps))
    first = timecode.first
    count = shots[-1].end + 1
    def frames(start: int, length: int) -> otio.opentime.TimeRange:
        return otio.opentime.TimeRange(otio.opentime.RationalTime(start, rate), otio.opentime.RationalTime(length, rate))

    timeline = otio.schema.Timeline(name=name, global_start_time=otio.opentime.RationalTime(first, rate),
                                    metadata={"framestyle": {"drop_frame": timecode.drop_frame}})
    track = otio.schema.Track(name="V1", kind=otio.schema.TrackKind.Video)
    for shot in shots:
        track.append(otio.schema.Clip(
            name=name,
            media_reference=_media_reference(media, sequence, frames(first, count)),
            source_range=frames(first + shot.start, shot.length),
            metadata={"framestyle": {"shot": shot.index}},
        ))
    timeline.tracks.append(track)
    return timeline


def _media_reference(media: str, sequence: io.FrameSource | None,
                     available: otio.opentime.TimeRange) -> otio.core.MediaReference:
    """The clips' media: the frame files of ``sequence`` as an image sequence when they are
    numbered without gaps and named alike (prefix, digits of one width or unpadded, suffix),
    else ``media`` as one external file or folder."""
    if sequence is not None and sequence.kind == "folder" and not sequence.gaps:
        parts = [re.fullmatch(r"(.*?)(\d+)(\.[^.]+)", name) for name in sequence.files]
        widths = {len(m[2]) for m in parts}
        if len({(m[1], m[3]) for m in parts}) == 1 and (len(widths) == 1 or all(m[2][0] != "0" for m in parts)):
            return otio.schema.ImageSequenceReference(
                target_url_base=Path(media).as_uri() + "/", name_prefix=parts[0][1], name_suffix=parts[0][3],
                start_frame=sequence.numbers[0], frame_step=1, rate=available.duration.rate,
                frame_zero_padding=widths.pop() if len(widths) == 1 else 0, available_range=available)
    return otio.schema.ExternalReference(target_url=media, available_range=available)


def write_cut_list(path: str | os.PathLike, shots: Sequence[Shot], timecode: ClipTimecode, name: str,
                   media: str, sequence: io.FrameSource | None = None) -> None:
    """Write the shots (see :func:`shots_timeline`) as a CMX 3600 EDL or an OpenTimelineIO file, atomically.

    The extension chooses: ``.edl`` or ``.otio``. The EDL header gets the frame-count mode
    line (``FCM: DROP FRAME`` or ``FCM: NON-DROP FRAME``) that the cmx_3600 adapter leaves
    out. That adapter labels 29.97 and 59.94 frames/s as drop-frame, so a clip with
    non-drop timecode at those rates is refused for EDL (OpenTimelineIO stores frames).

    Raises
    ------
    FramestyleError
        Another extension, or an EDL of a non-drop 29.97/59.94 clip.

    References
    ----------
    CMX 3600 EDL layout: header lines ``TITLE:`` and ``FCM:``, then the events.
    """
    adapter = _ADAPTERS.get(Path(path).suffix.lower())
    if adapter is None:
        raise FramestyleError(f"{path}: a cut list is written as .edl (CMX 3600) or .otio (OpenTimelineIO)")
    timeline = shots_timeline(shots, timecode, name, media, sequence)
    if adapter == "otio_json":
        write_bytes(path, otio.adapters.write_to_string(timeline, adapter_name=adapter).encode())
        return
    if ntsc_nominal(timecode.fps) in (30, 60) and not timecode.drop_frame:
        raise FramestyleError(f"{path}: the EDL writer labels {timecode.fps:g} frames/s as drop-frame but this clip's"
                              " timecode is non-drop; write an .otio file instead")
    if timecode.label(0) > timecode.label(shots[-1].end):  # the labels wrap at 24:00:00:00
        raise FramestyleError(f"{path}: the clip's timecode runs past midnight ({timecode.label(0)} to "
                              f"{timecode.label(shots[-1].end)}), which an EDL cannot hold; write an .otio file, or "
                              f"give an earlier --start-timecode")
    # The adapter places events on the record timeline through the track's own range
    # (its reader stores a record start of 01:00:00:00 as a track starting at -01:00:00:00),
    # not through the timeline's global start time: give it the record start that way.
    edl = copy.deepcopy(timeline)
    track = edl.tracks[0]
    reel = re.sub(r"[^A-Za-z0-9]", "", Path(name).stem)[:8] or "AX"  # CMX 3600: 8 letters or digits, no spaces
    for clip in track:
        clip.metadata["cmx_3600"] = {"reel": reel}
    track.source_range = otio.opentime.TimeRange(-timeline.global_start_time, track.duration())
    text = otio.adapters.write_to_string(edl, adapter_name=adapter, rate=float(exact_rate(timecode.fps)))
    title, _, events = text.partition("\n")
    fcm = "FCM: DROP FRAME" if timecode.drop_frame else "FCM: NON-DROP FRAME"
    write_bytes(path, f"{title}\n{fcm}\n{events}".encode())


def _edl_as_counted(text: str) -> str:
    """An EDL's text with every timecode's last separator saying what its ``FCM:`` line says
    (``;`` drop-frame, ``:`` non-drop), for the cmx_3600 adapter, which counts each timecode
    by its separator alone: a drop-frame list written with ``:`` (common) was read 108 frames
    an hour late. Comment lines (``*``) above the first event, which the adapter cannot
    place, are left out; a UTF-8 byte-order mark is already gone (read as ``utf-8-sig``)."""
    first_event = re.search(r"^\s*\d+\s", text, re.MULTILINE)  # comments above it stop the adapter
    if first_event:
        head = text[:first_event.start()]
        text = "".join(line for line in head.splitlines(keepends=True) if not line.lstrip().startswith("*")) + \
            text[first_event.start():]
    drop = _fcm_drop_frame(text)
    if drop is None:
        return text
    return _TIMECODE.sub(lambda m: f"{m[1]}{';' if drop else ':'}{m[2]}", text)


def _fcm_drop_frame(text: str) -> bool | None:
    """What an EDL's ``FCM:`` line says: drop-frame (True), non-drop (False), or None without one."""
    mode = re.search(r"^FCM:\s*(NON-DROP|DROP)", text, re.MULTILINE | re.IGNORECASE)
    return None if mode is None else mode[1].upper() == "DROP"


def _edl_drop_frame(text: str) -> bool | None:
    """Whether an EDL counts drop-frame: its ``FCM:`` line, else its first event's record
    timecode (``;`` before the frames: drop-frame); None where neither says."""
    drop = _fcm_drop_frame(text)
    if drop is not None:
        return drop
    event = re.search(r"^\d+\s.*\d\d:\d\d:\d\d([:;.,])\d\d\s*$", text, re.MULTILINE)
    return None if event is None else event[1] in ";,"


def _cut_drop_frame(path: str | os.PathLike) -> bool | None:
    """Whether a cut list counts drop-frame: an EDL's ``FCM:`` line, else its first event's
    record timecode (``;`` before the frames: drop-frame); an OpenTimelineIO file of ours,
    its timeline's ``metadata["framestyle"]["drop_frame"]``. None where the file does not say
    (OpenTimelineIO stores frame counts): the rate's usual mode then (drop-frame at 29.97).

    References
    ----------
    CMX 3600 EDL layout: ``FCM: DROP FRAME`` / ``FCM: NON-DROP FRAME``; SMPTE ST 12-1 labels
    drop-frame timecode with ``;`` before the frames (both from memory).
    """
    if cut_list_adapter(path) == "otio_json":
        timeline = otio.adapters.read_from_file(str(path), adapter_name="otio_json")
        return timeline.metadata.get("framestyle", {}).get("drop_frame")
    return _edl_drop_frame(Path(path).read_text(encoding="utf-8-sig", errors="replace"))


def _frames(time: otio.opentime.RationalTime, rate) -> int:
    """A time as a whole number of frames at ``rate``."""
    return round(time.value_rescaled_to(float(rate)))


def _label(count: int, timecode: ClipTimecode) -> str:
    """The SMPTE label of a frame count in the clip's counting mode."""
    return frame_to_timecode(max(0, count), timecode.fps, timecode.drop_frame)
