"""Still-image files — frames, style images, mattes — through OpenImageIO.

One backend for every still format framestyle reads or writes: PNG, JPEG, TIFF, OpenEXR and
DPX, 8/16-bit integer or half/float samples, gray, RGB, with or without alpha. OpenImageIO
reads headers without decoding pixels (so a folder's frame sizes are checked cheaply) and
keeps samples at their stored type: integers are scaled to [0, 1] here, float samples
(EXR, float TIFF) come back as stored, not clipped. Colour comes back straight: a file whose
alpha is associated (premultiplied: always for EXR, by convention, Kainz, Bogart et al.,
"Technical Introduction to OpenEXR", from memory; TIFF with ExtraSamples = 1, TIFF 6.0
section 18) has its colour divided by the alpha where the alpha is above 0. Only a channel
the file marks as alpha is alpha (an RGB TIFF's unspecified extra channel is not read).
Pixels are turned upright by the file's EXIF/TIFF Orientation tag (1-8, TIFF 6.0 section 8;
Exif 2.32 section 4.6.4), as viewers show them. An image is its display window: an OpenEXR
data window smaller than it (a renderer's crop to the lit region) is placed in it, black
around; data beyond it (overscan) is not read.

Images leave this module as float32 ``(H, W, 3)`` RGB (gray replicated), alpha as
``(H, W)``; channel order is RGB(A) throughout, as OpenImageIO delivers it.
"""

from __future__ import annotations

import contextlib
import os
import sys
import tempfile
from pathlib import Path

import numpy as np
import OpenImageIO as oiio

from framestyle import atomic
from framestyle.errors import FramestyleError

IMAGE_EXTS = frozenset({".png", ".jpg", ".jpeg", ".tif", ".tiff", ".exr", ".dpx"})
# Bit depths written for each output extension; 32 means float (16 is half for EXR).
_WRITE_DEPTHS = {".png": (8, 16), ".tif": (8, 16, 32), ".tiff": (8, 16, 32), ".exr": (16, 32)}
_WRITE_TYPES = {8: oiio.UINT8, 16: oiio.UINT16, 32: oiio.FLOAT}
_INT_SCALE = {np.dtype(np.uint8): 255.0, np.dtype(np.uint16): 65535.0}
DTYPE_DEPTH = {np.dtype(np.uint8): 8, np.dtype(np.uint16): 16, np.dtype(np.float32): 32}
_SAMPLE_DEPTH = {oiio.UINT8: 8, oiio.UINT16: 16, oiio.FLOAT: 32}
HALF_MAX = 65504.0
"""The largest finite half float (IEEE 754 binary16): what an infinite sample is read as."""


def image_header(file: Path) -> tuple[int, int, bool, int]:
    """(width, height, has alpha, bit depth) of an image file as :func:`load_image` decodes
    it, from its header without decoding the pixels; the depth as in :data:`DTYPE_DEPTH`."""
    spec = _open(file, lambda image: image.spec())
    width, height = _display_size(spec)
    width, height = (height, width) if _orientation(spec) >= 5 else (width, height)
    return width, height, _channels(spec)[1], _SAMPLE_DEPTH[_sample_type(spec)]


def load_image(file: Path) -> np.ndarray:
    """Decode an image file to upright ``(H, W, C)`` samples in their own type (uint8, uint16,
    float32), colour straight.

    C is 1 (gray), 2 (gray + alpha), 3 (RGB) or 4 (RGBA); half floats are widened to float32,
    other integer depths (10/12-bit DPX) to uint16. A float sample that is NaN reads as 0 and
    an infinite one as ±:data:`HALF_MAX`, as compositors commonly clean a renderer's stray
    samples (common practice), so that they cannot spread through filters, flow and solver.
    """
    def read(image):
        spec = image.spec()
        kind = _sample_type(spec)
        colour, alpha = _channels(spec)
        channels = colour + alpha
        with _native_stderr() as said:  # libpng prints its own error there; ours names the file
            pixels = image.read_image(0, 0, 0, channels, kind)
        if pixels is None:
            raise FramestyleError(f"{file}: cannot decode the image ({said[0] if said else _last_error()})")
        problem = image.geterror() if image.has_error else ""
        if "Premature end" in problem:  # libjpeg's warning for a cut-off file: it fills the rest grey
            raise FramestyleError(f"{file}: the file is cut short; only part of the image could be decoded")
        pixels = pixels.reshape(spec.height, spec.width, channels)
        if kind == oiio.FLOAT:  # a renderer's NaN or infinite samples: no picture to keep there
            pixels = np.nan_to_num(pixels, nan=0.0, posinf=HALF_MAX, neginf=-HALF_MAX)
        if alpha and not spec.get_int_attribute("oiio:UnassociatedAlpha", 0):  # set only for straight alpha
            pixels = _unpremultiply(pixels)
        return np.ascontiguousarray(_upright(_in_display_window(pixels, spec), _orientation(spec)))

    check_not_empty(file)
    return _open(file, read)


def write_image(path: Path, image: np.ndarray, bit_depth: int = 8) -> None:
    """Atomically write a float RGB(A) image as PNG, TIFF or OpenEXR, chosen by extension.

    Integer formats clip to [0, 1] and round to the nearest level (half to even); float TIFF
    and EXR (zip-compressed) store the values unchanged. Either the complete file appears or
    the old one stays.

    Parameters
    ----------
    path : ``.png`` (bit depth 8 or 16), ``.tif``/``.tiff`` (8, 16 or 32 = float) or ``.exr``
        (16 = half or 32 = float)
    image : float ``(H, W, 3)`` RGB or ``(H, W, 4)`` RGBA, the alpha written as given: straight
        (unassociated) for PNG and TIFF, premultiplied by convention for EXR
    """
    path = Path(path)
    ext = path.suffix.lower()
    if ext not in _WRITE_DEPTHS:
        raise FramestyleError(f"{path}: cannot write '{ext}' frames; use .png, .tif, .tiff or .exr")
    if bit_depth not in _WRITE_DEPTHS[ext]:
        allowed = " or ".join(map(str, _WRITE_DEPTHS[ext]))
        raise FramestyleError(f"{path}: {ext} frames are written at bit depth {allowed}, not {bit_depth}")
    image = np.asarray(image)
    if image.ndim != 3 or image.shape[2] not in (3, 4) or not np.issubdtype(image.dtype, np.floating):
        raise ValueError(f"expected a float (H, W, 3) or (H, W, 4) image for {path}, got {image.dtype} {image.shape}")
    if not np.isfinite(image).all():
        raise ValueError(f"image for {path} has NaN or infinite values")
    height, width = image.shape[:2]
    kind = oiio.HALF if ext == ".exr" and bit_depth == 16 else _WRITE_TYPES[bit_depth]
    spec = oiio.ImageSpec(width, height, image.shape[2], kind)
    if ext == ".exr":
        spec.attribute("compression", "zip")
    elif image.shape[2] == 4:  # the colour is straight already: OpenImageIO would otherwise divide it by alpha
        spec.attribute("oiio:UnassociatedAlpha", 1)
    samples = np.ascontiguousarray(quantise(image, 32 if ext == ".exr" else bit_depth))
    with atomic.atomic_path(path) as tmp:
        out = oiio.ImageOutput.create(str(tmp))
        if out is None or not out.open(str(tmp), spec):
            raise FramestyleError(f"{path}: cannot write the image ({_last_error()})")
        ok = out.write_image(samples)
        ok = out.close() and ok
        if not ok:
            raise FramestyleError(f"{path}: cannot write the image ({out.geterror() or _last_error()})")


def to_rgb(raw: np.ndarray) -> np.ndarray:
    """``(H, W, C)`` decoded samples → float32 ``(H, W, 3)`` RGB; gray replicated, alpha dropped."""
    colour = raw[..., :3] if raw.shape[2] >= 3 else np.repeat(raw[..., :1], 3, axis=2)
    return colour.astype(np.float32) / np.float32(_INT_SCALE.get(raw.dtype, 1.0))


def to_alpha(raw: np.ndarray) -> np.ndarray | None:
    """The alpha of ``(H, W, C)`` decoded samples as float32 ``(H, W)``, or None without one."""
    if raw.shape[2] not in (2, 4):
        return None
    return raw[..., -1].astype(np.float32) / np.float32(_INT_SCALE.get(raw.dtype, 1.0))


def quantise(image: np.ndarray, bit_depth: int) -> np.ndarray:
    """Float image → samples of ``bit_depth``: 8/16 clip to [0, 1] and round; 32 stays float."""
    if bit_depth == 32:
        return image.astype(np.float32)
    dtype = np.uint8 if bit_depth == 8 else np.uint16
    top = np.iinfo(dtype).max
    return np.rint(np.clip(image, 0.0, 1.0) * top).astype(dtype)


def _sample_type(spec):
    """The type samples are read as: 8 and 16-bit integers as stored, floats as float32,
    other integer depths (10/12-bit DPX) as uint16."""
    base = spec.format.basetype
    if base in (oiio.UINT8, oiio.UINT16):
        return base
    return oiio.FLOAT if base in (oiio.HALF, oiio.FLOAT, oiio.DOUBLE) else oiio.UINT16


def _channels(spec) -> tuple[int, bool]:
    """(colour channels read, whether the next channel, read too, is the file's alpha)."""
    colour = 3 if spec.nchannels >= 3 else 1
    return colour, spec.alpha_channel == colour


def _unpremultiply(pixels: np.ndarray) -> np.ndarray:
    """Associated (premultiplied) colour ``(H, W, C)`` divided by the last channel, the
    alpha, where it is above 0; integer samples rounded back to their type."""
    scale = _INT_SCALE.get(pixels.dtype, 1.0)
    alpha = pixels[..., -1:].astype(np.float64) / scale
    colour = pixels[..., :-1] / np.where(alpha > 0, alpha, 1.0)
    if scale != 1.0:
        colour = np.clip(np.rint(colour), 0, scale)
    return np.concatenate([colour.astype(pixels.dtype), pixels[..., -1:]], axis=2)


def _display_size(spec) -> tuple[int, int]:
    """(width, height) of the picture: the display window (OpenEXR's displayWindow, OpenImageIO's
    "full" rectangle; Kainz, Bogart et al., "Technical Introduction to OpenEXR", from memory),
    which formats without one give as the pixels' own."""
    return (spec.full_width, spec.full_height) if spec.full_width > 0 and spec.full_height > 0 else (
        spec.width, spec.height)


def _in_display_window(pixels: np.ndarray, spec) -> np.ndarray:
    """``(h, w, C)`` pixels of the data window placed in the display window: where no data
    lies the samples are 0 (transparent black), data outside it (overscan) is cut off."""
    width, height = _display_size(spec)
    if (spec.x, spec.y, spec.width, spec.height) == (spec.full_x, spec.full_y, width, height):
        return pixels
    out = np.zeros((height, width, pixels.shape[2]), pixels.dtype)
    x0, x1 = max(spec.x, spec.full_x), min(spec.x + spec.width, spec.full_x + width)
    y0, y1 = max(spec.y, spec.full_y), min(spec.y + spec.height, spec.full_y + height)
    if x0 < x1 and y0 < y1:
        out[y0 - spec.full_y:y1 - spec.full_y, x0 - spec.full_x:x1 - spec.full_x] = \
            pixels[y0 - spec.y:y1 - spec.y, x0 - spec.x:x1 - spec.x]
    return out


def _orientation(spec) -> int:
    """The file's EXIF/TIFF Orientation, 1 (upright) to 8; other values count as 1."""
    value = spec.get_int_attribute("Orientation", 1)
    return value if 1 <= value <= 8 else 1


def _upright(pixels: np.ndarray, orientation: int) -> np.ndarray:
    """Stored pixels ``(H, W, C)`` as shown for an Orientation tag 1-8: row 0 of the stored
    image is the top (1-4) or the left side (5-8) of the picture, mirrored for 2, 4, 5, 7.
    Each tag as (quarter turns counter-clockwise, then mirrored left-right)."""
    turns = {1: (0, False), 2: (0, True), 3: (2, False), 4: (2, True),
             5: (3, True), 6: (3, False), 7: (1, True), 8: (1, False)}[orientation]
    upright = np.rot90(pixels, turns[0])
    return upright[:, ::-1] if turns[1] else upright


def check_not_empty(file: Path) -> None:
    """Raise :class:`FramestyleError` for a zero-byte file (a frame an export never wrote)."""
    if file.stat().st_size == 0:
        raise FramestyleError(f"{file}: file is empty (0 bytes)")


def _open(file: Path, use):
    """Open ``file`` with OpenImageIO, call ``use(image_input)``, close it; errors name the file."""
    config = oiio.ImageSpec()  # samples as stored: OpenImageIO would otherwise premultiply the
    config.attribute("oiio:UnassociatedAlpha", 1)  # colour of files with straight alpha
    image = oiio.ImageInput.open(str(file), config)
    if image is None:
        if not os.access(file, os.R_OK):  # OpenImageIO says only "Could not open file"
            raise FramestyleError(f"{file}: not readable (permission denied)")
        raise FramestyleError(f"{file}: cannot decode the image ({_last_error()})")
    try:
        return use(image)
    finally:
        image.close()


@contextlib.contextmanager
def _native_stderr():
    """Collect what C libraries write to file descriptor 2 meanwhile, instead of the terminal.

    Yields a list that holds, once the block is left, the last line written there, without
    libpng's "libpng error: " prefix (nothing if nothing was written). Only a decode runs
    inside it, so no message of ours is held back.
    """
    sys.stderr.flush()
    saved, said = os.dup(2), []
    with tempfile.TemporaryFile() as sink:
        os.dup2(sink.fileno(), 2)
        try:
            yield said
        finally:
            os.dup2(saved, 2)
            os.close(saved)
            sink.seek(0)
            lines = sink.read().decode(errors="replace").strip().splitlines()
            said.extend(line.removeprefix("libpng error: ") for line in lines[-1:])


def _last_error() -> str:
    return (oiio.geterror() or "damaged or unsupported").strip().splitlines()[-1]
