"""Reading frame sequences and video, writing frames and video: the I/O edge.

Everything inside framestyle sees frames as float32 ``(H, W, 3)`` RGB in [0, 1]; the
conversions from and to what files hold (OpenCV's BGR order, 8/16-bit integers, half
floats, YUV video) happen only in this module.

Inputs
------
* A folder of numbered frames (``shot_0001.png``, ``shot_9.png`` ... ``shot_10.png``): PNG,
  JPEG, TIFF or OpenEXR, 8/16-bit or float, gray/RGB/RGBA. The frame number is the digit
  run that ends the file stem; frames sort by that number, never lexically. Hidden files
  (names starting with "."), such as macOS ``._shot_0001.png`` companions or our own
  temporary files, are not frames. When several numbered sequences share the folder the
  longest one is used and the other image files are listed in ``FrameSource.ignored``;
  sequences of equal length are refused as ambiguous.
* A video file in any container and codec the bundled ffmpeg (imageio-ffmpeg) decodes.
  Video frames are named ``frame_000000``, ``frame_000001`` ... numbered from 0, so a
  video frame's number, index and name agree.

Video frames are counted and streamed with ffmpeg's ``-fps_mode passthrough``: one output
frame per decoded frame. imageio-ffmpeg's ``read_frames`` default (the image2pipe muxer)
resamples variable-frame-rate clips, common from phones, to a constant rate by
duplicating or dropping frames, which would break "one output PNG per input frame".
Starting mid-clip uses ffmpeg's ``trim=start_frame=N`` filter: it decodes and discards
the first N frames (about 600 frames/s for 720p H.264 on two cores), exact for any clip,
where a time-based ``-ss`` seek is only exact for constant-frame-rate clips.

OpenEXR goes through the bundled ffmpeg's EXR codec, because the OpenCV wheel is built
without OpenEXR support. EXR values are returned as stored (linear, not clipped); with an
alpha channel the stored colour is premultiplied, as is the OpenEXR convention (Kainz,
Bogart et al., "Technical Introduction to OpenEXR", from memory), and is returned so.
"""

from __future__ import annotations

import hashlib
import math
import re
import struct
import subprocess
import tempfile
from dataclasses import dataclass
from fractions import Fraction
from pathlib import Path
from typing import Iterator, Literal, Sequence

import cv2
import imageio_ffmpeg
import numpy as np
from PIL import Image

from framestyle.atomic import atomic_path
from framestyle.errors import FramestyleError

_IMAGE_EXTS = frozenset({".png", ".jpg", ".jpeg", ".tif", ".tiff", ".exr"})
_NUMBERED = re.compile(r"^(.*?)(\d+)$")  # non-greedy prefix: the digit run is as long as possible
# Bit depth written for each output extension; 32 means float (half for EXR at 16).
_WRITE_DEPTHS = {".png": (8, 16), ".tif": (8, 16, 32), ".tiff": (8, 16, 32), ".exr": (16, 32)}
_INT_SCALE = {np.dtype(np.uint8): 255.0, np.dtype(np.uint16): 65535.0}
_DTYPE_DEPTH = {np.dtype(np.uint8): 8, np.dtype(np.uint16): 16, np.dtype(np.float32): 32}

# The first real video stream (capital V skips cover-art pictures), one frame per decoded frame.
_VIDEO_STREAM = ["-map", "0:V:0", "-fps_mode", "passthrough"]
_HIGH_DEPTH_PIX = re.compile(r"(9|10|12|14|16|48|64)(le|be)$")  # e.g. yuv420p10le, rgb48le
_ALPHA_PIX = re.compile(r"^(yuva|gbrap|ya|rgba|bgra|argb|abgr)")
_NTSC_BASES = (24, 30, 48, 60, 120)  # rates that NTSC-derived footage runs at times 1000/1001

# H.264 4:2:0 needs even dimensions: drop a trailing odd row/column rather than resample.
# BT.709 matrix and matching stream tags so players decode the colours as they were
# (ITU-R BT.709; common practice). The ffmpeg 9 bundled here derives either from the
# other; older builds that imageio-ffmpeg>=0.4.9 allows need both spelled out.
_ENCODE_FILTER = "crop=trunc(iw/2)*2:trunc(ih/2)*2:0:0,scale=out_color_matrix=bt709:out_range=tv,format=yuv420p"
_ENCODE_VIDEO = [
    "-c:v", "libx264", "-preset", "medium", "-crf", "18", "-pix_fmt", "yuv420p",
    "-colorspace", "bt709", "-color_primaries", "bt709", "-color_trc", "bt709", "-color_range", "tv",
]

_EXR_MAGIC = b"v/1\x01"
_EXR_DEEP_FLAG = 0x800  # version field bit 11: "non-image" (deep) parts, which ffmpeg cannot decode
_EXR_HALF, _EXR_FLOAT = 1, 2  # channel pixel types; 0 is UINT


@dataclass(frozen=True)
class FrameSource:
    """An opened input: a folder of numbered frames or a video file.

    Attributes
    ----------
    path : Path
        The folder or video file.
    kind : {"folder", "video"}
    count, width, height : int
        Number of frames and the size every frame has.
    fps : float or None
        The video's frame rate; None for folders.
    names : tuple of str
        One output stem per frame, in frame order: the input file's stem for folders,
        ``frame_000000`` style (0-based, at least 6 digits) for video.
    numbers : tuple of int
        Frame numbers: parsed from the file names for folders, 0-based indices for video.
    gaps : tuple of (int, int)
        Inclusive ranges of numbers missing from a folder's numbering (not renumbered).
    bit_depth : int
        8 or 16 for integer samples, 32 for float (EXR, float TIFF); taken from the first frame.
    has_alpha : bool
        Whether the first frame carries an alpha channel.
    has_audio : bool
        Whether the video has an audio stream (always False for folders).
    files : tuple of str
        The frame file names in frame order (folders only).
    ignored : tuple of str
        Image files in the folder that are not part of the chosen sequence.
    """

    path: Path
    kind: Literal["folder", "video"]
    count: int
    width: int
    height: int
    fps: float | None
    names: tuple[str, ...]
    numbers: tuple[int, ...]
    gaps: tuple[tuple[int, int], ...]
    bit_depth: int
    has_alpha: bool
    has_audio: bool
    files: tuple[str, ...] = ()
    ignored: tuple[str, ...] = ()


def open_source(path: str | Path) -> FrameSource:
    """Open a folder of numbered frames or a video file and check it.

    Folder frames are checked at once for being non-empty and having the first frame's
    size (Pillow reads only the headers; OpenEXR headers are parsed here); a frame whose
    pixels are damaged is reported when it is read. A video is decoded once to count its
    frames exactly.

    Parameters
    ----------
    path : str or Path
        Folder of frames or video file.

    Returns
    -------
    FrameSource

    Raises
    ------
    FramestyleError
        Naming the file: missing path, no frames, frames of different sizes, an empty or
        unreadable frame, or a file that is not a readable video.
    """
    path = Path(path)
    if not path.exists():
        raise FramestyleError(f"{path}: no such file or folder")
    if path.is_dir():
        return _open_folder(path)
    if path.suffix.lower() in _IMAGE_EXTS:
        raise FramestyleError(f"{path}: is a single image; give a folder of numbered frames or a video")
    return _open_video(path)


def read_frame(source: FrameSource, index: int) -> np.ndarray:
    """Return frame ``index`` (0-based position) as float32 ``(H, W, 3)`` RGB in [0, 1].

    8-bit samples are divided by 255, 16-bit by 65535; float samples (EXR, float TIFF) are
    returned as stored. Gray is replicated to RGB; alpha is dropped (see ``read_alpha``).
    For video this decodes from the start of the clip: use ``iter_frames`` to go through
    many frames.
    """
    _check_index(source, index)
    return _to_rgb(_read_raw(source, index))


def read_image(path: str | Path) -> np.ndarray:
    """Read one image file (a style image, say) as float32 ``(H, W, 3)`` RGB in [0, 1].

    Any format OpenCV decodes, or OpenEXR; converted as ``read_frame`` converts frames.
    """
    path = Path(path)
    if not path.is_file():
        raise FramestyleError(f"{path}: no such image file")
    _check_not_empty(path)
    return _to_rgb(_load_image(path))


def read_alpha(source: FrameSource, index: int) -> np.ndarray | None:
    """Return frame ``index``'s alpha as float32 ``(H, W)`` in [0, 1], or None without alpha.

    Slow for video, like ``read_frame``.
    """
    _check_index(source, index)
    if not source.has_alpha:
        return None
    return _to_alpha(_read_raw(source, index))


def iter_frames(source: FrameSource, start: int = 0, stop: int | None = None) -> Iterator[tuple[int, np.ndarray]]:
    """Yield ``(index, frame)`` for indices ``start <= index < stop`` in order.

    Frames are as ``read_frame`` returns them. A video is decoded in one sequential pass;
    frames before ``start`` are decoded and discarded (exact for variable frame rates).

    Parameters
    ----------
    source : FrameSource
    start : int
        First index, 0 <= start <= count.
    stop : int or None
        One past the last index; None for ``source.count``.
    """
    stop = source.count if stop is None else stop
    if not 0 <= start <= stop <= source.count:
        raise IndexError(f"frame range {start}..{stop} is outside 0..{source.count} for {source.path}")
    if source.kind == "video":
        return ((i, _to_rgb(raw)) for i, raw in _iter_video_raw(source, start, stop))
    return ((i, _to_rgb(_read_file(source, i))) for i in range(start, stop))


def frame_name(source: FrameSource, index: int, ext: str = ".png") -> str:
    """Return the output file name for frame ``index``: its name stem plus ``ext``."""
    _check_index(source, index)
    if not ext.startswith("."):
        raise ValueError(f"extension must start with '.', got {ext!r}")
    return source.names[index] + ext


def write_frame(path: str | Path, image: np.ndarray, bit_depth: int = 8) -> None:
    """Atomically write a float RGB image as PNG, TIFF or OpenEXR, chosen by extension.

    Integer formats clip to [0, 1] and round to the nearest level; float TIFF and EXR
    store the values unchanged. Either the complete file appears or the old one stays.

    Parameters
    ----------
    path : str or Path
        Target file; ``.png`` (bit depth 8 or 16), ``.tif``/``.tiff`` (8, 16 or 32 = float)
        or ``.exr`` (16 = half or 32 = float).
    image : np.ndarray
        float ``(H, W, 3)`` RGB.
    bit_depth : int
        Sample size, see ``path``.
    """
    path = Path(path)
    ext = path.suffix.lower()
    if ext not in _WRITE_DEPTHS:
        raise FramestyleError(f"{path}: cannot write '{ext}' frames; use .png, .tif, .tiff or .exr")
    if bit_depth not in _WRITE_DEPTHS[ext]:
        allowed = " or ".join(map(str, _WRITE_DEPTHS[ext]))
        raise FramestyleError(f"{path}: {ext} frames are written at bit depth {allowed}, not {bit_depth}")
    image = np.asarray(image)
    if image.ndim != 3 or image.shape[2] != 3 or not np.issubdtype(image.dtype, np.floating):
        raise ValueError(f"expected a float (H, W, 3) image for {path}, got {image.dtype} {image.shape}")
    if not np.isfinite(image).all():
        raise ValueError(f"image for {path} has NaN or infinite values")
    with atomic_path(path) as tmp:
        if ext == ".exr":
            _write_exr(tmp, image, bit_depth, path)
        else:
            samples = np.ascontiguousarray(_quantise(image, bit_depth)[..., ::-1])  # OpenCV wants BGR
            if not cv2.imwrite(str(tmp), samples):
                raise FramestyleError(f"{path}: OpenCV could not write the image")


def write_video(
    frames_paths: Sequence[Path], fps: float, out_path: Path, audio_from: Path | None = None
) -> None:
    """Encode image files, in the given order, into an H.264 video, atomically.

    The files are streamed to the bundled ffmpeg as they are (no decoding in Python) and
    encoded with libx264, CRF 18, yuv420p, BT.709. An odd width or height loses its last
    column or row (4:2:0 chroma needs even sizes). The audio of ``audio_from`` is carried
    over (copied when AAC, else encoded to AAC) and cut at the video's end; the video keeps
    exactly one frame per file.

    Parameters
    ----------
    frames_paths : sequence of Path
        PNG (or other ffmpeg-readable still image) files, one per frame.
    fps : float
        Frame rate; 23.976-style rates become the exact NTSC ratios (24000/1001 ...).
    out_path : Path
        Video file to write; its extension chooses the container (``.mp4`` usual).
    audio_from : Path or None
        The source video whose first audio stream, if any, is carried over.
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
    rate = _rational_rate(fps)
    cmd = [imageio_ffmpeg.get_ffmpeg_exe(), "-hide_banner", "-loglevel", "error", "-y"]
    cmd += ["-f", "image2pipe", "-framerate", str(rate), "-i", "-"]
    streams = ["-map", "0:v:0"]
    audio: list[str] = []
    audio_codec = _video_meta(Path(audio_from)).get("audio_codec") if audio_from is not None else None
    if audio_codec is not None:
        cmd += ["-i", str(audio_from)]
        streams += ["-map", "1:a:0"]
        audio = ["-c:a", "copy"] if audio_codec == "aac" else ["-c:a", "aac", "-b:a", "192k"]
        # Cut at the last frame's end instead of -shortest, which would also cut the video
        # when the audio is the shorter stream.
        audio += ["-t", f"{float(len(paths) / rate) + 1e-6:.6f}"]
    cmd += streams + ["-vf", _ENCODE_FILTER] + _ENCODE_VIDEO + audio + ["-movflags", "+faststart"]
    with atomic_path(out_path) as tmp, tempfile.TemporaryFile() as errors:
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
            raise FramestyleError(f"{out_path}: video encoding failed ({_last_line(errors.read())})")


def fingerprint(source: FrameSource) -> str:
    """Return a stable fingerprint of the input's content, for checking a resume.

    SHA-256 over every byte of every frame file (with its name) or of the video file, so
    any change of content is seen, while copying or moving the input (new paths, new
    modification times) is not. Hashing runs at about 1 GB/s on one core (measured on the
    development machine), small next to the time stylising takes.

    Returns
    -------
    str
        Hexadecimal SHA-256 digest.
    """
    digest = hashlib.sha256(f"{source.kind}\n".encode())
    if source.kind == "folder":
        items = [(name, source.path / name) for name in source.files]
    else:
        items = [("", source.path)]
    for label, file in items:
        content = hashlib.sha256()
        with open(file, "rb") as handle:
            for block in iter(lambda: handle.read(1 << 20), b""):
                content.update(block)
        digest.update(f"{label}\t{content.hexdigest()}\n".encode())
    return digest.hexdigest()


# ----- folders -------------------------------------------------------------------------


def _open_folder(path: Path) -> FrameSource:
    groups: dict[tuple[str, str], list[tuple[int, str]]] = {}
    loose = []  # image files without a frame number
    for entry in sorted(path.iterdir()):
        if entry.name.startswith(".") or entry.suffix.lower() not in _IMAGE_EXTS or not entry.is_file():
            continue
        match = _NUMBERED.match(entry.stem)
        if match is None:
            loose.append(entry.name)
        else:
            groups.setdefault((match[1], entry.suffix), []).append((int(match[2]), entry.name))
    if not groups:
        raise FramestyleError(f"{path}: no numbered image frames (like name_0001.png) in this folder")
    ranked = sorted(groups.items(), key=lambda item: -len(item[1]))
    if len(ranked) > 1 and len(ranked[0][1]) == len(ranked[1][1]):
        tied = ", ".join(f"{prefix}#{ext}" for (prefix, ext), frames in ranked if len(frames) == len(ranked[0][1]))
        raise FramestyleError(f"{path}: several frame sequences of equal length ({tied}); keep one per folder")
    frames = sorted(ranked[0][1])
    for (number, first), (other, second) in zip(frames, frames[1:]):
        if number == other:
            raise FramestyleError(f"{path / second}: has the same frame number {number} as {first}")
    files = tuple(name for _, name in frames)
    for name in files:
        _check_not_empty(path / name)
    first_frame = _load_image(path / files[0])
    height, width = first_frame.shape[:2]
    for name in files[1:]:
        size = _image_size(path / name)
        if size != (width, height):
            raise FramestyleError(
                f"{path / name}: frame is {size[0]}x{size[1]} but {files[0]} is {width}x{height}"
            )
    numbers = tuple(number for number, _ in frames)
    return FrameSource(
        path=path,
        kind="folder",
        count=len(files),
        width=width,
        height=height,
        fps=None,
        names=tuple(Path(name).stem for name in files),
        numbers=numbers,
        gaps=tuple((a + 1, b - 1) for a, b in zip(numbers, numbers[1:]) if b > a + 1),
        bit_depth=_DTYPE_DEPTH[first_frame.dtype],
        has_alpha=first_frame.shape[2] in (2, 4),
        has_audio=False,
        files=files,
        ignored=tuple(sorted(loose + [name for _, group in ranked[1:] for _, name in group])),
    )


def _image_size(file: Path) -> tuple[int, int]:
    """(width, height) from the file header, without decoding the pixels."""
    if file.suffix.lower() == ".exr":
        width, height, _ = _exr_header(file)
        return width, height
    try:
        with Image.open(file) as image:
            return image.size
    except (OSError, Image.DecompressionBombError):
        # Pillow cannot parse some valid files (e.g. float RGB TIFF): decode them fully.
        image = _load_image(file)
        return image.shape[1], image.shape[0]


def _load_image(file: Path) -> np.ndarray:
    """Decode an image file to ``(H, W, C)`` RGB(A) or gray(+alpha) in its own sample type."""
    if file.suffix.lower() == ".exr":
        return _read_exr(file)
    image = cv2.imread(str(file), cv2.IMREAD_UNCHANGED)
    if image is None:
        raise FramestyleError(f"{file}: cannot decode the image (damaged or unsupported)")
    if image.ndim == 2:
        image = image[..., None]
    elif image.shape[2] >= 3:
        image = image[..., [2, 1, 0, 3][: image.shape[2]]]  # OpenCV stores BGR(A)
    if image.dtype == np.float64:
        image = image.astype(np.float32)
    if image.dtype not in _DTYPE_DEPTH:
        raise FramestyleError(f"{file}: unsupported sample type {image.dtype} (use 8/16-bit or float)")
    return image


def _read_file(source: FrameSource, index: int) -> np.ndarray:
    file = source.path / source.files[index]
    image = _load_image(file)
    if image.shape[:2] != (source.height, source.width):
        raise FramestyleError(
            f"{file}: frame is {image.shape[1]}x{image.shape[0]} but the sequence is {source.width}x{source.height}"
        )
    return image


# ----- OpenEXR through ffmpeg -----------------------------------------------------------


def _exr_header(file: Path) -> tuple[int, int, str]:
    """Parse an OpenEXR header: (width, height, ffmpeg's native pixel format for it).

    Layout from the OpenEXR "File Layout" document (from memory): magic, version int32,
    then attributes as name NUL, type NUL, int32 size, value, ended by an empty name.
    The size is the display window, which ffmpeg decodes to.
    """
    try:
        with open(file, "rb") as handle:
            if handle.read(4) != _EXR_MAGIC:
                raise FramestyleError(f"{file}: not an OpenEXR file")
            if struct.unpack("<i", handle.read(4))[0] & _EXR_DEEP_FLAG:
                raise FramestyleError(f"{file}: deep OpenEXR images are not supported")
            attributes = {}
            while name := _exr_string(handle, file):
                _exr_string(handle, file)  # attribute type; the names used here fix it
                (size,) = struct.unpack("<i", handle.read(4))
                attributes[name] = handle.read(size)
        x_min, y_min, x_max, y_max = struct.unpack("<4i", attributes["displayWindow"])
        channels, pos, listing = {}, 0, attributes["channels"]
        while listing[pos] != 0:  # chlist: name NUL, pixel type, pLinear + 3 reserved, x/y sampling
            end = listing.index(b"\0", pos)
            channels[listing[pos:end].decode("latin-1")] = struct.unpack("<i", listing[end + 1 : end + 5])[0]
            pos = end + 17
    except (KeyError, IndexError, ValueError, struct.error) as exc:
        raise FramestyleError(f"{file}: damaged OpenEXR header") from exc
    if {"R", "G", "B"} <= channels.keys():
        used, layout = ("R", "G", "B", "A"), "gbrap" if "A" in channels else "gbrp"
    elif "Y" in channels:
        used, layout = ("Y",), "gray"
    else:
        raise FramestyleError(f"{file}: OpenEXR image has no R, G, B or Y channels")
    types = {channels[c] for c in used if c in channels}
    if types not in ({_EXR_HALF}, {_EXR_FLOAT}):
        raise FramestyleError(f"{file}: OpenEXR channels must be all half or all float")
    bits = 16 if types == {_EXR_HALF} else 32
    return x_max - x_min + 1, y_max - y_min + 1, f"{layout}f{bits}le"


def _exr_string(handle, file: Path) -> str:
    text = bytearray()
    while (char := handle.read(1)) != b"\0":
        if not char or len(text) > 255:
            raise FramestyleError(f"{file}: damaged OpenEXR header")
        text += char
    return text.decode("latin-1")


def _read_exr(file: Path) -> np.ndarray:
    width, height, pix_fmt = _exr_header(file)
    # Decoding to the file's own pixel format keeps ffmpeg's scaler out: it would clip
    # values outside [0, 1] and round half floats.
    data = _run_ffmpeg(["-i", str(file), "-f", "rawvideo", "-pix_fmt", pix_fmt, "-"], file, "cannot decode OpenEXR")
    planes = np.frombuffer(data, "<f2" if pix_fmt.endswith("f16le") else "<f4")
    n_planes = {"gbrp": 3, "gbrap": 4, "gray": 1}[pix_fmt.split("f", 1)[0]]
    if planes.size != n_planes * width * height:
        raise FramestyleError(f"{file}: OpenEXR decoded to an unexpected size")
    planes = planes.reshape(n_planes, height, width).astype(np.float32)
    if n_planes >= 3:
        planes = planes[[2, 0, 1, 3][:n_planes]]  # ffmpeg's planar order is G, B, R(, A)
    return np.ascontiguousarray(np.moveaxis(planes, 0, -1))


def _write_exr(tmp: Path, image: np.ndarray, bit_depth: int, target: Path) -> None:
    height, width = image.shape[:2]
    planes = np.stack([image[..., 1], image[..., 2], image[..., 0]]).astype("<f4")  # G, B, R
    args = ["-f", "rawvideo", "-pix_fmt", "gbrpf32le", "-s", f"{width}x{height}", "-i", "-", "-frames:v", "1"]
    args += ["-c:v", "exr", "-format", "half" if bit_depth == 16 else "float", "-compression", "zip16"]
    _run_ffmpeg(args + ["-update", "1", "-y", str(tmp)], target, "cannot write OpenEXR", stdin=planes.tobytes())


# ----- video ----------------------------------------------------------------------------


def _open_video(path: Path) -> FrameSource:
    meta = _video_meta(path)
    progress = _run_ffmpeg(
        ["-i", str(path), *_VIDEO_STREAM, "-f", "null", "-progress", "pipe:1", "-"], path, "not a readable video"
    )
    counts = re.findall(rb"^frame=(\d+)", progress, re.MULTILINE)
    count = int(counts[-1]) if counts else 0
    if count == 0:
        raise FramestyleError(f"{path}: video has no frames")
    if not meta["fps"] > 0:
        raise FramestyleError(f"{path}: video frame rate is unknown")
    pix_fmt = meta["pix_fmt"].split("(", 1)[0]
    width, height = meta["size"]
    digits = max(6, len(str(count - 1)))
    return FrameSource(
        path=path,
        kind="video",
        count=count,
        width=width,
        height=height,
        fps=float(_rational_rate(meta["fps"])),
        names=tuple(f"frame_{i:0{digits}d}" for i in range(count)),
        numbers=tuple(range(count)),
        gaps=(),
        bit_depth=16 if _HIGH_DEPTH_PIX.search(pix_fmt) else 8,
        has_alpha=bool(_ALPHA_PIX.match(pix_fmt)),
        has_audio="audio_codec" in meta,
    )


def _video_meta(path: Path) -> dict:
    """imageio-ffmpeg's parse of ffmpeg's stream report (size after any rotation, fps, ...)."""
    reader = imageio_ffmpeg.read_frames(str(path), output_params=_VIDEO_STREAM)
    try:
        return next(reader)
    except Exception as exc:  # imageio-ffmpeg raises IOError/RuntimeError, its parser Index/AttributeError
        raise FramestyleError(f"{path}: not a readable video") from exc
    finally:
        reader.close()


def _iter_video_raw(source: FrameSource, start: int, stop: int) -> Iterator[tuple[int, np.ndarray]]:
    """Stream frames start..stop-1 as ``(H, W, C)`` uint8/uint16 RGB(A) from one ffmpeg run."""
    channels = 4 if source.has_alpha else 3
    if source.bit_depth == 16:
        pix_fmt, dtype = ("rgba64le" if source.has_alpha else "rgb48le"), np.dtype("<u2")
    else:
        pix_fmt, dtype = ("rgba" if source.has_alpha else "rgb24"), np.dtype(np.uint8)
    frame_bytes = source.width * source.height * channels * dtype.itemsize
    cmd = [imageio_ffmpeg.get_ffmpeg_exe(), "-hide_banner", "-loglevel", "error", "-i", str(source.path)]
    cmd += _VIDEO_STREAM + (["-vf", f"trim=start_frame={start}"] if start else [])
    cmd += ["-frames:v", str(stop - start), "-f", "rawvideo", "-pix_fmt", pix_fmt, "-"]
    with tempfile.TemporaryFile() as errors:
        process = subprocess.Popen(cmd, stdin=subprocess.DEVNULL, stdout=subprocess.PIPE, stderr=errors)
        try:
            for index in range(start, stop):
                data = process.stdout.read(frame_bytes)
                if len(data) < frame_bytes:
                    process.wait()
                    errors.seek(0)
                    reason = _last_line(errors.read(), f"it ended at frame {index}, expected {source.count} frames")
                    raise FramestyleError(f"{source.path}: cannot decode the video ({reason})")
                yield index, np.frombuffer(data, dtype).reshape(source.height, source.width, channels)
        finally:
            process.stdout.close()
            if process.poll() is None:
                process.kill()
            process.wait()


def _rational_rate(fps: float) -> Fraction:
    """The frame rate as a fraction; ffmpeg reports 23.976 as '23.98', so snap NTSC rates."""
    for base in _NTSC_BASES:
        if abs(fps - base * 1000 / 1001) < 0.005:
            return Fraction(base * 1000, 1001)
    return Fraction(fps).limit_denominator(1001)


# ----- shared helpers -------------------------------------------------------------------


def _read_raw(source: FrameSource, index: int) -> np.ndarray:
    if source.kind == "video":
        return next(_iter_video_raw(source, index, index + 1))[1]
    return _read_file(source, index)


def _to_rgb(raw: np.ndarray) -> np.ndarray:
    colour = raw[..., :3] if raw.shape[2] >= 3 else np.repeat(raw[..., :1], 3, axis=2)
    return colour.astype(np.float32) / np.float32(_INT_SCALE.get(raw.dtype, 1.0))


def _to_alpha(raw: np.ndarray) -> np.ndarray | None:
    if raw.shape[2] not in (2, 4):
        return None
    return raw[..., -1].astype(np.float32) / np.float32(_INT_SCALE.get(raw.dtype, 1.0))


def _quantise(image: np.ndarray, bit_depth: int) -> np.ndarray:
    if bit_depth == 32:
        return image.astype(np.float32)
    dtype = np.uint8 if bit_depth == 8 else np.uint16
    top = np.iinfo(dtype).max
    return np.rint(np.clip(image, 0.0, 1.0) * top).astype(dtype)


def _check_not_empty(file: Path) -> None:
    if file.stat().st_size == 0:
        raise FramestyleError(f"{file}: file is empty (0 bytes)")


def _check_index(source: FrameSource, index: int) -> None:
    if not 0 <= index < source.count:
        raise IndexError(f"frame index {index} is outside 0..{source.count - 1} for {source.path}")


def _run_ffmpeg(args: list[str], file: Path, problem: str, stdin: bytes | None = None) -> bytes:
    """Run the bundled ffmpeg; on failure raise '<file>: <problem> (<ffmpeg's last line>)'."""
    cmd = [imageio_ffmpeg.get_ffmpeg_exe(), "-hide_banner", "-loglevel", "error", *args]
    if stdin is None:
        result = subprocess.run(cmd, stdin=subprocess.DEVNULL, capture_output=True)
    else:
        result = subprocess.run(cmd, input=stdin, capture_output=True)
    if result.returncode != 0:
        raise FramestyleError(f"{file}: {problem} ({_last_line(result.stderr)})")
    return result.stdout


def _last_line(stderr: bytes, default: str = "ffmpeg gave no reason") -> str:
    lines = [line.strip() for line in stderr.decode(errors="replace").splitlines() if line.strip()]
    return re.sub(r"^\[[^\]]*\]\s*", "", lines[-1]) if lines else default  # drop "[in#0 @ 0x..]"
