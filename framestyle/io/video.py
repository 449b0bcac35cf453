"""Video files through the ffmpeg that imageio-ffmpeg ships: probe, stream frames, encode.

Video frames are counted and streamed with ffmpeg's ``-fps_mode passthrough``: one output
frame per decoded frame. imageio-ffmpeg's ``read_frames`` default (the image2pipe muxer)
resamples variable-frame-rate clips, common from phones, to a constant rate by duplicating
or dropping frames, which would break "one output frame per input frame". Starting mid-clip
uses ffmpeg's ``trim=start_frame=N`` filter: it decodes and discards the first N frames
(about 600 frames/s for 720p H.264 on two cores), exact for any clip, where a time-based
``-ss`` seek is only exact for constant-frame-rate clips.

Two encodings come out: an H.264 preview (:func:`write_video`) and an edit-ready Apple
ProRes 422 HQ hand-off (:func:`write_prores`); both carry the source's audio and start
timecode.

Colour: a YUV stream is converted to RGB with the matrix its tags name; an untagged one with
BT.709 when it is HD (wider than 1024 or taller than 576 pixels) and BT.601 otherwise, as
players treat untagged files (common practice; from memory, e.g. mpv's rule), where ffmpeg's
own default would be BT.601 for every size. The videos written carry the source's pixel
aspect ratio, and frames with alpha go into them composited over black.
"""

from __future__ import annotations

import logging
import math
import re
import subprocess
import tempfile
from dataclasses import dataclass
from fractions import Fraction
from pathlib import Path
from typing import Callable, Iterator, Sequence

import imageio_ffmpeg
import numpy as np

from framestyle import atomic
from framestyle.errors import FramestyleError
from framestyle.timecode import ClipTimecode, exact_rate

# The first real video stream (capital V skips cover-art pictures), one frame per decoded frame.
# imageio-ffmpeg warns on its logger that a rotated video's frames come out at another size
# than its stream's: they come upright, which is what we read and check, so only errors show
logging.getLogger("imageio_ffmpeg").setLevel(logging.ERROR)
_VIDEO_STREAM = ["-map", "0:V:0", "-fps_mode", "passthrough"]
_HIGH_DEPTH_PIX = re.compile(r"(9|10|12|14|16|48|64)(le|be)$")  # e.g. yuv420p10le, rgb48le
_ALPHA_PIX = re.compile(r"^(yuva|gbrap|ya|rgba|bgra|argb|abgr)")
# ffmpeg's stream report shows a file's start timecode as "timecode : 01:00:00:00" (or
# ";00" for drop-frame), from a QuickTime/MP4 timecode (tmcd) track or a container tag.
_TIMECODE_TAG = re.compile(r"^\s*timecode\s*:\s*(\d{2}:\d{2}:\d{2}[:;]\d{2})\s*$", re.IGNORECASE | re.MULTILINE)
# The first video stream's line of the report ("Video: h264 ..., yuv420p(tv, bt709, progressive),
# 1280x720 [SAR 1:1 DAR 16:9], ..."), cover-art pictures skipped, and what is read from it.
_VIDEO_LINE = re.compile(r"^\s*Stream #.*?: Video: (?!.*\(attached pic\)).*$", re.MULTILINE)
_SAR = re.compile(r"SAR (\d+):(\d+)")
# Colour-space names ffmpeg prints for a stream's YUV matrix ("bt709", or "bt709/bt709/bt709"
# spelled matrix/primaries/transfer); "unknown" or none at all is an untagged matrix.
_MATRICES = {"bt709", "bt470bg", "smpte170m", "smpte240m", "bt2020nc", "bt2020c", "fcc", "ycgco", "gbr",
             "chroma-derived-nc", "chroma-derived-c", "ictcp", "smpte2085"}
# Frames of a variable-frame-rate clip are timed against the commonest frame time; a frame more
# than this share of it early or late is out of step with the audio (half a frame: common practice).
_OUT_OF_STEP = 0.5

# BT.709 matrix, and frame tags (primaries, transfer, matrix, range) that the encoders copy
# into the stream, so players and editing software decode the colours as they were
# (ITU-R BT.709; common practice).
_BT709 = ("scale=out_color_matrix=bt709:out_range=tv,format={},"
          "setparams=color_primaries=bt709:color_trc=bt709:colorspace=bt709:range=tv")

# H.264 preview, 4:2:0: chroma is halved both ways, so even sizes are needed; a trailing odd
# row/column is dropped rather than resampled.
_H264_FILTER = "crop=trunc(iw/2)*2:trunc(ih/2)*2:0:0," + _BT709.format("yuv420p")
_H264_VIDEO = ["-c:v", "libx264", "-preset", "medium", "-crf", "18", "-pix_fmt", "yuv420p", "-movflags", "+faststart"]

# Apple ProRes 422 HQ hand-off: ffmpeg's prores_ks encoder at profile 3 = HQ (fourcc apch),
# 10-bit 4:2:2 (chroma halved across only: an odd width loses its last column). Vendor
# "apl0" marks the frames as Apple-made, which some editing software checks (common
# practice; from memory).
# How ffmpeg's demuxers say a file ends before its own index or header says it does: the MP4
# demuxer's "partial file", the Matroska one's "File ended prematurely".
_CUT_SHORT = re.compile(rb"partial file|File ended prematurely")
_PRORES_FILTER = "crop=trunc(iw/2)*2:ih:0:0," + _BT709.format("yuv422p10le")
_PRORES_VIDEO = ["-c:v", "prores_ks", "-profile:v", "3", "-vendor", "apl0", "-pix_fmt", "yuv422p10le"]
# Uncompressed 24-bit PCM, the usual audio of an edit hand-off .mov (common practice): it
# holds 16- and 24-bit sources exactly and decoded AAC at better than 16-bit precision; the
# source's sample rate and channels are kept (no resampling).
_PRORES_AUDIO = ["-c:a", "pcm_s24le"]


@dataclass(frozen=True)
class VideoInfo:
    """What a video file holds: frame count, size, rate, sample layout and start timecode."""

    count: int
    width: int
    height: int
    fps: float
    bit_depth: int  # 8, or 16 for high-bit-depth pixel formats (10-bit and up)
    has_alpha: bool
    timecode: str | None = None  # the first frame's label, from the file's timecode tag
    pixel_aspect: Fraction = Fraction(1)  # width over height of a stored pixel (the stream's SAR)
    matrix: str | None = None  # YUV→RGB matrix to decode with where the stream names none
    drift: float = 0.0  # seconds: the largest lead or lag of a frame against the constant ``fps``


def probe_video(path: Path) -> VideoInfo:
    """Decode ``path`` once to count its frames exactly; read its size, rate, format, timecode,
    pixel aspect ratio and colour matrix.

    A clip whose frames are not evenly timed (variable frame rate, common from phones) gets
    as ``fps`` the rate of its commonest frame time, an edit rate, rather than its average
    (ffmpeg's "fps", 17.65 for a 25 fps clip with a held frame); ``drift`` says how far its
    frames then stand from their own times.
    """
    meta = _video_meta(path)
    decoded = _ffmpeg(["-i", str(path), *_VIDEO_STREAM, "-f", "null", "-progress", "pipe:1", "-"])
    if decoded.returncode != 0:
        raise FramestyleError(f"{path}: not a readable video ({last_line(decoded.stderr)})")
    cut = _CUT_SHORT.search(decoded.stderr)  # data the index promises but the file lacks (MP4, Matroska)
    if cut:
        raise FramestyleError(f"{path}: the file is cut short (ffmpeg: {cut[0].decode()}); copy or export it again")
    counts = re.findall(rb"^frame=(\d+)", decoded.stdout, re.MULTILINE)
    count = int(counts[-1]) if counts else 0
    if count == 0:
        raise FramestyleError(f"{path}: video has no frames")
    if not meta["fps"] > 0:
        raise FramestyleError(f"{path}: video frame rate is unknown")
    pix_fmt, _, tags = meta["pix_fmt"].partition("(")
    width, height = meta["size"]
    report = stream_report(path)
    line = _VIDEO_LINE.search(report)
    sar = _SAR.search(line[0]) if line else None
    pixel_aspect = Fraction(int(sar[1]), int(sar[2])) if sar and int(sar[1]) and int(sar[2]) else Fraction(1)
    if meta.get("rotate", 0) % 180:  # the frames come upright, turned a quarter: so are their pixels
        pixel_aspect = 1 / pixel_aspect
    fps, drift = frame_timing(_frame_times(path), meta["fps"])
    return VideoInfo(count, width, height, float(exact_rate(fps)),
                     16 if _HIGH_DEPTH_PIX.search(pix_fmt) else 8, bool(_ALPHA_PIX.match(pix_fmt)),
                     timecode_tag(report), pixel_aspect, untagged_matrix(pix_fmt, tags, width, height), drift)


def stream_report(path: Path) -> str:
    """The bundled ffmpeg's report of a file's streams (what ``ffmpeg -i`` prints)."""
    cmd = [imageio_ffmpeg.get_ffmpeg_exe(), "-hide_banner", "-i", str(path)]
    # With no output file ffmpeg prints the report and exits with status 1.
    return subprocess.run(cmd, stdin=subprocess.DEVNULL, capture_output=True).stderr.decode(errors="replace")


def timecode_tag(report: str) -> str | None:
    """The start timecode label in a file's :func:`stream_report`, or None.

    The report lists the tag of a QuickTime/MP4 timecode (tmcd) track or a container's
    TIMECODE tag; the first one listed is taken.
    """
    match = _TIMECODE_TAG.search(report)
    return match[1] if match else None


def untagged_matrix(pix_fmt: str, tags: str, width: int, height: int) -> str | None:
    """"bt709" for an HD YUV stream whose tags (ffmpeg's "tv, bt709, progressive") name no
    matrix; None otherwise: a tagged stream, an RGB one, or an untagged one up to 1024×576,
    which ffmpeg's default (BT.601) decodes as players do."""
    named = {part.strip().split("/")[0] for part in tags.rstrip(")").split(",")}
    hd = width > 1024 or height > 576
    return "bt709" if pix_fmt.startswith("yuv") and hd and not named & _MATRICES else None


def frame_timing(times: Sequence[float], average_fps: float) -> tuple[float, float]:
    """(frame rate, drift in seconds) of frames shown at ``times`` (seconds, any order).

    Evenly timed frames (every frame time within a quarter of the commonest) keep
    ``average_fps``, with no drift. Otherwise the rate is that of the commonest frame time
    (the mean of the frame times within a quarter of the median), and the drift is the
    largest distance of a frame from its place at that constant rate, counted from the first.
    """
    shown = np.sort(np.asarray(times, dtype=np.float64))
    steps = np.diff(shown)
    if steps.size == 0 or not np.median(steps) > 0:
        return average_fps, 0.0
    usual = np.median(steps)
    close = np.abs(steps - usual) <= usual / 4
    if close.all():
        return average_fps, 0.0
    step = float(steps[close].mean())
    return 1.0 / step, float(np.abs(shown - shown[0] - step * np.arange(shown.size)).max())


def _frame_times(path: Path) -> list[float]:
    """Presentation times (seconds) of the first video stream's packets, without decoding."""
    listing = _ffmpeg(["-i", str(path), "-map", "0:V:0", "-c", "copy", "-f", "framecrc", "-"]).stdout.decode()
    base = re.search(r"^#tb 0: (\d+)/(\d+)", listing, re.MULTILINE)
    if not base:
        return []
    tick = Fraction(int(base[1]), int(base[2]))
    # data lines: stream index, dts, pts, duration, size, checksum[, flags]; a packet without a
    # time (AVI's) shows INT64_MIN
    rows = (line.split(",") for line in listing.splitlines() if not line.startswith("#"))
    return [float(int(row[2]) * tick) for row in rows
            if len(row) >= 6 and row[2].strip().lstrip("-").isdigit() and int(row[2]) != -2**63]


def iter_video(path: Path, info: VideoInfo, start: int, stop: int) -> Iterator[tuple[int, np.ndarray]]:
    """Stream frames start..stop-1 as ``(H, W, C)`` uint8/uint16 RGB(A) from one ffmpeg run."""
    channels = 4 if info.has_alpha else 3
    if info.bit_depth == 16:
        pix_fmt, dtype = ("rgba64le" if info.has_alpha else "rgb48le"), np.dtype("<u2")
    else:
        pix_fmt, dtype = ("rgba" if info.has_alpha else "rgb24"), np.dtype(np.uint8)
    frame_bytes = info.width * info.height * channels * dtype.itemsize
    cmd = [imageio_ffmpeg.get_ffmpeg_exe(), "-hide_banner", "-loglevel", "error", "-i", str(path)]
    filters = ([f"trim=start_frame={start}"] if start else []) + (
        [f"scale=in_color_matrix={info.matrix}", f"format={pix_fmt}"] if info.matrix else [])
    cmd += _VIDEO_STREAM + (["-vf", ",".join(filters)] if filters else [])
    cmd += ["-frames:v", str(stop - start), "-f", "rawvideo", "-pix_fmt", pix_fmt, "-"]
    with tempfile.TemporaryFile() as errors:
        process = subprocess.Popen(cmd, stdin=subprocess.DEVNULL, stdout=subprocess.PIPE, stderr=errors)
        try:
            for index in range(start, stop):
                data = process.stdout.read(frame_bytes)
                if len(data) < frame_bytes:
                    process.wait()
                    errors.seek(0)
                    reason = last_line(errors.read(), f"it ended at frame {index}, expected {info.count} frames")
                    raise FramestyleError(f"{path}: cannot decode the video ({reason})")
                yield index, np.frombuffer(data, dtype).reshape(info.height, info.width, channels)
        finally:
            process.stdout.close()
            if process.poll() is None:
                process.kill()
            process.wait()


def write_video(frames_paths: Sequence[Path], fps: float, out_path: Path, audio_from: Path | None = None,
                start_timecode: str | None = None, pixel_aspect: Fraction = Fraction(1)) -> None:
    """Encode image files, in the given order, into an H.264 preview video, atomically.

    The files are streamed to the bundled ffmpeg as they are (no decoding in Python) and
    encoded with libx264, CRF 18, yuv420p, BT.709. An odd width or height loses its last
    column or row (4:2:0 chroma needs even sizes). The audio of ``audio_from`` is carried
    over (copied when AAC, else encoded to AAC) and cut at the video's end; the video keeps
    exactly one frame per file.

    Parameters
    ----------
    frames_paths : PNG (or other ffmpeg-readable still image) files, one per frame
    fps : frame rate; 23.976-style rates become the exact NTSC ratios (24000/1001 ...)
    out_path : video file to write; its extension chooses the container (``.mp4`` usual)
    audio_from : the source video whose first audio stream, if any, is carried over
    start_timecode : the first frame's SMPTE label (``HH:MM:SS:FF``, ``HH:MM:SS;FF``
        drop-frame), written as the file's timecode track; None writes none
    pixel_aspect : width over height of a pixel (the source's SAR), written in the stream so
        that anamorphic footage shows at its own shape

    Frames with alpha are composited over black (the video has no alpha channel).
    """
    def audio(codec: str) -> list[str]:
        return ["-c:a", "copy"] if codec == "aac" else ["-c:a", "aac", "-b:a", "192k"]

    _encode(frames_paths, fps, out_path, _H264_FILTER, _H264_VIDEO, audio, audio_from, start_timecode, pixel_aspect)


def write_prores(frames_paths: Sequence[Path], fps: float, out_path: Path, audio_from: Path | None = None,
                 start_timecode: str | None = None, pixel_aspect: Fraction = Fraction(1)) -> None:
    """Encode image files into an edit-ready Apple ProRes 422 HQ QuickTime file, atomically.

    The hand-off counterpart of :func:`write_video`: ffmpeg's ``prores_ks`` at profile HQ
    (fourcc ``apch``), 10-bit 4:2:2 (``yuv422p10le``) tagged BT.709, the source's audio as
    24-bit PCM at its own sample rate (cut at the video's end), the start timecode as a
    QuickTime timecode track, and exactly one frame per file at ``fps``. An odd width loses
    its last column (4:2:2 chroma is halved across).

    Parameters
    ----------
    frames_paths : PNG (8- or 16-bit) or other ffmpeg-readable still image files, one per frame
    fps : the source's frame rate; 23.976-style rates become the exact NTSC ratios
    out_path : the ``.mov`` file to write
    audio_from : the source video whose first audio stream, if any, is carried over
    start_timecode : the first frame's SMPTE label (``HH:MM:SS:FF``, ``HH:MM:SS;FF``
        drop-frame), written as the file's timecode track; None writes none
    pixel_aspect : the source's pixel aspect ratio, as in :func:`write_video`

    Frames with alpha are composited over black, as in :func:`write_video`.

    References
    ----------
    SMPTE RDD 36:2015, Apple ProRes Bitstream Syntax and Decoding Process (profiles,
    4:2:2 10-bit). Apple, "Apple ProRes" white paper (2022): ProRes 422 HQ, fourcc apch.
    """
    out_path = Path(out_path)
    if out_path.suffix.lower() != ".mov":
        raise FramestyleError(f"{out_path}: a ProRes hand-off is a QuickTime file; name it .mov")
    _encode(frames_paths, fps, out_path, _PRORES_FILTER, _PRORES_VIDEO, lambda codec: _PRORES_AUDIO,
            audio_from, start_timecode, pixel_aspect)


def _encode(frames_paths: Sequence[Path], fps: float, out_path: Path, video_filter: str, video: list[str],
            audio: Callable[[str], list[str]], audio_from: Path | None, start_timecode: str | None,
            pixel_aspect: Fraction) -> None:
    """Stream image files through the bundled ffmpeg into ``out_path`` (see :func:`write_video`).

    ``audio(codec)`` gives the audio encoding options for the source's audio codec.
    """
    paths = [Path(p) for p in frames_paths]
    out_path = Path(out_path)
    if not paths:
        raise FramestyleError(f"{out_path}: no frames to encode")
    for p in paths:
        if not p.is_file():
            raise FramestyleError(f"{p}: frame to encode is missing")
    if not (math.isfinite(fps) and fps > 0):
        raise FramestyleError(f"{out_path}: frame rate must be a positive number, got {fps}")
    timecode: list[str] = []
    if start_timecode is not None:
        try:
            ClipTimecode(fps, start_timecode)
        except ValueError as exc:
            raise FramestyleError(f"{out_path}: start timecode: {exc}") from None
        timecode = ["-timecode", start_timecode]
    rate = exact_rate(fps)
    cmd = [imageio_ffmpeg.get_ffmpeg_exe(), "-hide_banner", "-loglevel", "error", "-y"]
    cmd += ["-f", "image2pipe", "-framerate", str(rate), "-i", "-"]
    streams = ["-map", "0:v:0"]
    audio_options: list[str] = []
    audio_codec = _video_meta(Path(audio_from)).get("audio_codec") if audio_from is not None else None
    if audio_codec is not None:
        cmd += ["-i", str(audio_from)]
        streams += ["-map", "1:a:0"]
        # Cut at the last frame's end instead of -shortest, which would also cut the video
        # when the audio is the shorter stream.
        audio_options = audio(audio_codec) + ["-t", f"{float(len(paths) / rate) + 1e-6:.6f}"]
    # over black: colour times alpha (frames without alpha get an opaque one), then the alpha dropped
    over_black = "format=gbrap16le,premultiply=inplace=1,"
    aspect = f",setsar={pixel_aspect.numerator}/{pixel_aspect.denominator}"
    cmd += streams + ["-vf", over_black + video_filter + aspect] + video + audio_options + timecode
    with atomic.atomic_path(out_path) as tmp, tempfile.TemporaryFile() as errors:
        process = subprocess.Popen(cmd + [str(tmp)], stdin=subprocess.PIPE, stderr=errors, bufsize=0)
        try:
            try:
                for p in paths:
                    process.stdin.write(p.read_bytes())
            except BrokenPipeError:
                pass  # ffmpeg stopped early; its exit status and message say why
            process.stdin.close()
            status = process.wait()
        finally:
            if process.poll() is None:
                process.kill()
                process.wait()
        if status != 0:
            errors.seek(0)
            raise FramestyleError(f"{out_path}: video encoding failed ({last_line(errors.read())})")


def _ffmpeg(args: list[str]) -> subprocess.CompletedProcess:
    """Run the bundled ffmpeg, reporting errors only; its output and messages captured."""
    cmd = [imageio_ffmpeg.get_ffmpeg_exe(), "-hide_banner", "-loglevel", "error", *args]
    return subprocess.run(cmd, stdin=subprocess.DEVNULL, capture_output=True)


def last_line(stderr: bytes, default: str = "ffmpeg gave no reason") -> str:
    """ffmpeg's last message line, without its ``[in#0 @ 0x..]`` prefix."""
    lines = [line.strip() for line in stderr.decode(errors="replace").splitlines() if line.strip()]
    return re.sub(r"^\[[^\]]*\]\s*", "", lines[-1]) if lines else default


def _video_meta(path: Path) -> dict:
    """imageio-ffmpeg's parse of ffmpeg's stream report (size after any rotation, fps, ...)."""
    reader = imageio_ffmpeg.read_frames(str(path), output_params=_VIDEO_STREAM)
    try:
        return next(reader)
    except Exception as exc:  # imageio-ffmpeg raises IOError/RuntimeError, its parser Index/AttributeError
        raise FramestyleError(f"{path}: not a readable video") from exc
    finally:
        reader.close()
