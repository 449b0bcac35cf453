"""Tests for framestyle.io: reading folders and video, writing frames and video.

Reference libraries: OpenCV (cv2.imread/imwrite) for image files, imageio-ffmpeg's own
readers (read_frames, count_frames_and_secs) and ffmpeg's stream report for video. All
fixtures are generated here, in temporary folders.
"""

from __future__ import annotations

import os
import re
import shutil
import struct
import subprocess
from pathlib import Path

import cv2
import imageio_ffmpeg
import numpy as np
import pytest

from framestyle.errors import FramestyleError
from framestyle.finish.compose import associated
from framestyle.working import working_size
from framestyle.io import (
    fingerprint,
    frame_name,
    iter_frames,
    pick_frames,
    open_source,
    read_alpha,
    read_frame,
    read_image,
    sequence_warnings,
    source_timecode,
    write_image,
    write_prores,
    write_video,
)

FFMPEG = imageio_ffmpeg.get_ffmpeg_exe()


def ffmpeg(*args: str) -> None:
    subprocess.run([FFMPEG, "-hide_banner", "-loglevel", "error", "-y", *args], check=True, stdin=subprocess.DEVNULL)


def probe(path: Path) -> str:
    """ffmpeg's stream report for ``path`` (ffmpeg exits 1 as no output is given)."""
    result = subprocess.run([FFMPEG, "-hide_banner", "-i", str(path)], capture_output=True, stdin=subprocess.DEVNULL)
    return result.stderr.decode()


def levels(seed: int, shape: tuple[int, ...], top: int, dtype) -> np.ndarray:
    return np.random.default_rng(seed).integers(0, top + 1, size=shape).astype(dtype)


def write_uint(path: Path, rgb: np.ndarray) -> None:
    """Write integer RGB(A) (or gray) samples with OpenCV, which wants BGR(A)."""
    if rgb.ndim == 3:
        rgb = rgb[..., [2, 1, 0, 3][: rgb.shape[2]]]
    assert cv2.imwrite(str(path), np.ascontiguousarray(rgb))


def cv2_rgb(path: Path) -> np.ndarray:
    """Reference decode: cv2.imread(IMREAD_UNCHANGED), BGR -> RGB."""
    return cv2.imread(str(path), cv2.IMREAD_UNCHANGED)[..., ::-1]


@pytest.fixture(scope="module")
def clip(tmp_path_factory) -> Path:
    """1 s of ffmpeg's testsrc2 pattern at 24 fps, 64x48, H.264 + a 440 Hz AAC tone.

    At this size consecutive testsrc2 frames can be identical, so the hue turns with the
    frame number to make every frame different.
    """
    path = tmp_path_factory.mktemp("clip") / "clip.mp4"
    ffmpeg("-f", "lavfi", "-i", "testsrc2=size=64x48:rate=24,hue=H=0.25*n", "-f", "lavfi", "-i", "sine=frequency=440",
           "-t", "1", "-c:v", "libx264", "-pix_fmt", "yuv420p", "-c:a", "aac", str(path))
    return path


# ----- folders --------------------------------------------------------------------------


def test_folder_frames_sort_numerically_without_zero_padding_and_gaps_are_reported(tmp_path):
    for number in (12, 9, 10, 8):  # 11 missing; lexical order would put 10 and 12 before 8
        write_uint(tmp_path / f"frame_{number}.png", np.full((6, 5, 3), number, np.uint8))
    source = open_source(tmp_path)
    assert source.kind == "folder" and source.count == 4 and source.fps is None
    assert (source.width, source.height, source.bit_depth) == (5, 6, 8)
    assert source.names == ("frame_8", "frame_9", "frame_10", "frame_12")
    assert source.numbers == (8, 9, 10, 12)
    assert source.gaps == ((11, 11),)
    assert not source.has_alpha
    assert [float(frame[0, 0, 0]) * 255 for _, frame in iter_frames(source)] == pytest.approx([8, 9, 10, 12])


def test_folder_frame_is_rgb_float_in_unit_range_matching_opencv(tmp_path):
    rgb = levels(1, (6, 5, 3), 255, np.uint8)
    rgb[0, 0] = (255, 0, 0)  # pure red must come out in channel 0
    write_uint(tmp_path / "shot_0001.png", rgb)
    image = read_frame(open_source(tmp_path), 0)
    assert image.dtype == np.float32 and image.shape == (6, 5, 3)
    assert image[0, 0].tolist() == [1.0, 0.0, 0.0]
    np.testing.assert_array_equal(image, cv2_rgb(tmp_path / "shot_0001.png") / np.float32(255))


def test_largest_numbered_sequence_is_used_and_other_files_are_not_frames(tmp_path):
    for n in range(1, 4):
        write_uint(tmp_path / f"main_{n:04d}.png", np.zeros((4, 4, 3), np.uint8))
    write_uint(tmp_path / "other_1.png", np.zeros((8, 8, 3), np.uint8))
    write_uint(tmp_path / "thumbnail.png", np.zeros((8, 8, 3), np.uint8))
    (tmp_path / "notes.txt").write_text("not an image")
    (tmp_path / "._main_0001.png").write_bytes(b"macOS resource fork, not a frame")
    source = open_source(tmp_path)
    assert source.files == ("main_0001.png", "main_0002.png", "main_0003.png")
    assert source.ignored == ("other_1.png",)  # numbered: said, as a frame the user may have meant
    assert sequence_warnings(source) == [f"{tmp_path}: reads the 3 frames main_0001.png..main_0003.png, not the "
                                         f"folder's other numbered files (other_1.png); keep one sequence per folder"]


def test_an_extension_in_other_case_is_the_same_sequence(tmp_path):
    for name in ("f_1.PNG", "f_2.png", "f_3.png"):  # as one camera card or export wrote them
        write_uint(tmp_path / name, np.zeros((4, 4, 3), np.uint8))
    source = open_source(tmp_path)
    assert source.files == ("f_1.PNG", "f_2.png", "f_3.png") and not sequence_warnings(source)


def test_two_sequences_of_equal_length_are_refused_as_ambiguous(tmp_path):
    for prefix in ("a_", "b_"):
        for n in (1, 2):
            write_uint(tmp_path / f"{prefix}{n}.png", np.zeros((4, 4, 3), np.uint8))
    with pytest.raises(FramestyleError, match="a_#.png, b_#.png"):
        open_source(tmp_path)


def test_a_frame_of_the_run_in_another_format_is_refused_not_dropped_as_a_gap(tmp_path):
    for n in (1, 3, 4):
        write_uint(tmp_path / f"f_{n:04d}.png", np.zeros((4, 4, 3), np.uint8))
    write_uint(tmp_path / "f_0002.jpg", np.zeros((4, 4, 3), np.uint8))
    with pytest.raises(FramestyleError, match=r"f_0002.jpg: a frame of the f_#.png sequence in another format"):
        open_source(tmp_path)
    (tmp_path / "f_0002.jpg").rename(tmp_path / "f_0001.jpg")  # beside its PNG (a thumbnail, say): not a frame
    assert open_source(tmp_path).files == ("f_0001.png", "f_0003.png", "f_0004.png")


def test_two_files_with_the_same_frame_number_are_refused(tmp_path):
    write_uint(tmp_path / "f_1.png", np.zeros((4, 4, 3), np.uint8))
    write_uint(tmp_path / "f_01.png", np.zeros((4, 4, 3), np.uint8))
    with pytest.raises(FramestyleError, match="f_1.png"):
        open_source(tmp_path)


def test_gray_frames_are_replicated_to_rgb(tmp_path):
    gray = levels(2, (6, 5), 255, np.uint8)
    write_uint(tmp_path / "g_1.png", gray)
    image = read_frame(open_source(tmp_path), 0)
    for channel in range(3):
        np.testing.assert_array_equal(image[..., channel], gray / np.float32(255))


def test_rgba_frames_give_rgb_and_alpha_separately(tmp_path):
    rgba = levels(3, (6, 5, 4), 255, np.uint8)
    write_uint(tmp_path / "a_1.png", rgba)
    source = open_source(tmp_path)
    assert source.has_alpha
    np.testing.assert_array_equal(read_frame(source, 0), rgba[..., :3] / np.float32(255))
    np.testing.assert_array_equal(read_alpha(source, 0), rgba[..., 3] / np.float32(255))


def test_alpha_is_none_for_frames_without_alpha(tmp_path):
    write_uint(tmp_path / "a_1.png", np.zeros((4, 4, 3), np.uint8))
    assert read_alpha(open_source(tmp_path), 0) is None


def test_16_bit_frames_keep_more_than_256_levels(tmp_path):
    rgb = levels(4, (32, 32, 3), 65535, np.uint16)
    write_uint(tmp_path / "deep_1.png", rgb)
    write_uint(tmp_path / "deep_2.png", rgb[..., 0])  # 16-bit gray
    source = open_source(tmp_path)
    assert source.bit_depth == 16
    image = read_frame(source, 0)
    assert len(np.unique(image)) > 256
    # Reference: OpenCV's 16-bit decode divided by 65535.
    np.testing.assert_array_equal(image, cv2_rgb(tmp_path / "deep_1.png") / np.float32(65535))
    np.testing.assert_array_equal(read_frame(source, 1)[..., 2], rgb[..., 0] / np.float32(65535))


@pytest.mark.parametrize("ext", [".jpg", ".jpeg", ".tif", ".tiff"])
def test_jpeg_and_tiff_frames_read_as_opencv_decodes_them(tmp_path, ext):
    write_uint(tmp_path / f"f_1{ext}", levels(5, (8, 10, 3), 255, np.uint8))
    image = read_frame(open_source(tmp_path), 0)
    np.testing.assert_array_equal(image, cv2_rgb(tmp_path / f"f_1{ext}") / np.float32(255))


def test_float_rgb_tiff_sequence_opens_and_reads_as_stored(tmp_path):
    values = np.random.default_rng(6).normal(0.5, 1.0, (6, 5, 3)).astype(np.float32)  # also < 0 and > 1
    for n in (1, 2):
        write_image(tmp_path / f"f_{n}.tif", values, bit_depth=32)
    source = open_source(tmp_path)
    assert source.bit_depth == 32 and source.count == 2
    np.testing.assert_array_equal(read_frame(source, 1), values)


def test_read_image_reads_a_single_file_as_rgb_float(tmp_path):
    rgb = levels(15, (7, 9, 3), 65535, np.uint16)
    write_uint(tmp_path / "style.png", rgb)
    np.testing.assert_array_equal(read_image(tmp_path / "style.png"), rgb / np.float32(65535))


@pytest.mark.parametrize("content", [None, b"", b"garbage bytes, not an image"])
def test_read_image_names_a_missing_empty_or_damaged_file(tmp_path, content):
    path = tmp_path / "style_ink.png"
    if content is not None:
        path.write_bytes(content)
    with pytest.raises(FramestyleError, match="style_ink.png"):
        read_image(path)


# ----- OpenEXR --------------------------------------------------------------------------


def write_exr_by_hand(path: Path, channels: dict[str, np.ndarray], pixel_type: int = 2) -> None:
    """An uncompressed scanline OpenEXR file laid out byte by byte.

    Layout per the OpenEXR "File Layout" document (from memory): magic 76 2f 31 01,
    version 2, attributes (name NUL type NUL int32 size value) ended by NUL, a uint64
    offset per scanline chunk, each chunk = int32 y, int32 size, then the line's samples
    channel by channel in alphabetical order. Pixel type 1 = HALF, 2 = FLOAT.
    """
    names = sorted(channels)
    height, width = channels[names[0]].shape
    sample = "<f2" if pixel_type == 1 else "<f4"

    def attribute(name: str, kind: str, value: bytes) -> bytes:
        return name.encode() + b"\0" + kind.encode() + b"\0" + struct.pack("<i", len(value)) + value

    chlist = b"".join(n.encode() + b"\0" + struct.pack("<iB3xii", pixel_type, 0, 1, 1) for n in names) + b"\0"
    window = struct.pack("<4i", 0, 0, width - 1, height - 1)
    header = b"v/1\x01" + struct.pack("<i", 2)
    header += attribute("channels", "chlist", chlist)
    header += attribute("compression", "compression", b"\0")
    header += attribute("dataWindow", "box2i", window)
    header += attribute("displayWindow", "box2i", window)
    header += attribute("lineOrder", "lineOrder", b"\0")
    header += attribute("pixelAspectRatio", "float", struct.pack("<f", 1.0))
    header += attribute("screenWindowCenter", "v2f", struct.pack("<2f", 0.0, 0.0))
    header += attribute("screenWindowWidth", "float", struct.pack("<f", 1.0))
    header += b"\0"
    chunks = []
    for y in range(height):
        line = b"".join(channels[n][y].astype(sample).tobytes() for n in names)
        chunks.append(struct.pack("<ii", y, len(line)) + line)
    offsets, position = [], len(header) + 8 * height
    for chunk in chunks:
        offsets.append(position)
        position += len(chunk)
    path.write_bytes(header + struct.pack(f"<{height}Q", *offsets) + b"".join(chunks))


def test_exr_rgba_file_laid_out_per_the_spec_reads_with_its_premultiplied_colour_made_straight(tmp_path):
    # OpenEXR's colour is premultiplied by the alpha (Kainz, Bogart et al., "Technical
    # Introduction to OpenEXR", from memory): straight colour is colour / alpha where alpha > 0.
    rng = np.random.default_rng(7)
    rgba = {c: rng.normal(0.5, 2.0, (5, 7)).astype(np.float32) for c in "RGBA"}  # HDR and negative values
    rgba["A"][0, :3] = 0.0  # transparent: the colour stays as stored
    write_exr_by_hand(tmp_path / "hdr_0001.exr", rgba)
    source = open_source(tmp_path)
    assert (source.width, source.height, source.bit_depth, source.has_alpha) == (7, 5, 32, True)
    alpha = rgba["A"]
    straight = np.dstack([rgba[c] / np.where(alpha > 0, alpha, 1) for c in "RGB"])
    np.testing.assert_allclose(read_frame(source, 0), straight, rtol=1e-6)
    np.testing.assert_array_equal(read_alpha(source, 0), alpha)
    # delivered premultiplied again (an unstylised frame), the colour is the file's
    delivered = associated(read_frame(source, 0), read_alpha(source, 0))
    np.testing.assert_allclose(delivered, np.dstack([rgba[c] for c in "RGB"]), rtol=1e-6)


@pytest.mark.parametrize("depth", [np.uint8, np.uint16])
def test_tiff_with_associated_alpha_reads_straight_and_an_unspecified_extra_channel_is_no_alpha(tmp_path, depth):
    # TIFF 6.0, section 18: ExtraSamples 1 is associated (premultiplied) alpha, 2 unassociated,
    # 0 unspecified data; tifffile writes the tags.
    import tifffile

    top = np.iinfo(depth).max
    straight = levels(11, (4, 6, 3), top, np.float64)
    alpha = np.array([0, top // 4, top // 2, top] * 6, np.float64).reshape(4, 6, 1)
    stored = np.dstack([np.rint(straight * alpha / top), alpha]).astype(depth)
    for name, extra in (("assoc", "assocalpha"), ("unassoc", "unassalpha"), ("unspec", "unspecified")):
        (tmp_path / name).mkdir()
        tifffile.imwrite(tmp_path / name / "f_1.tif", stored, photometric="rgb", extrasamples=[extra])
    assoc = open_source(tmp_path / "assoc")
    assert assoc.has_alpha and open_source(tmp_path / "unassoc").has_alpha
    seen = alpha[..., 0] > 0
    # back to straight within the rounding of the premultiplied integers (half a level / alpha)
    error = np.abs(read_frame(assoc, 0) * top - straight)[seen]
    assert (error <= 0.5 / (alpha / top).repeat(3, axis=2)[seen] + 0.5 + 1e-6).all()
    np.testing.assert_array_equal(read_frame(open_source(tmp_path / "unassoc"), 0), stored[..., :3] / np.float32(top))
    unspec = open_source(tmp_path / "unspec")
    assert not unspec.has_alpha and read_alpha(unspec, 0) is None
    np.testing.assert_array_equal(read_frame(unspec, 0), stored[..., :3] / np.float32(top))


@pytest.mark.parametrize("orientation", range(1, 9))
def test_frames_are_turned_upright_by_their_orientation_tag(tmp_path, orientation):
    # Reference: Pillow's ImageOps.exif_transpose of the same file (TIFF 6.0 section 8 /
    # Exif Orientation 1-8); tifffile writes the tag (274).
    import tifffile
    from PIL import Image, ImageOps

    stored = levels(12, (5, 8, 3), 255, np.uint8)
    tifffile.imwrite(tmp_path / "f_1.tif", stored, photometric="rgb", extratags=[(274, "H", 1, orientation, True)])
    expected = np.asarray(ImageOps.exif_transpose(Image.open(tmp_path / "f_1.tif")))
    source = open_source(tmp_path)
    assert (source.height, source.width) == expected.shape[:2]
    np.testing.assert_array_equal(read_frame(source, 0), expected / np.float32(255))


def test_a_sequence_whose_frames_differ_in_alpha_is_refused_naming_the_frame(tmp_path):
    write_uint(tmp_path / "t_1.png", levels(13, (4, 6, 4), 255, np.uint8))
    write_uint(tmp_path / "t_2.png", levels(14, (4, 6, 3), 255, np.uint8))
    with pytest.raises(FramestyleError, match=r"t_2.png: has no alpha channel but t_1.png has"):
        open_source(tmp_path)
    (tmp_path / "t_1.png").unlink()
    write_uint(tmp_path / "t_3.png", levels(15, (4, 6, 4), 255, np.uint8))
    with pytest.raises(FramestyleError, match=r"t_3.png: has alpha channel but t_2.png has none"):
        open_source(tmp_path)


def test_a_sequence_whose_frames_differ_in_depth_is_refused_naming_the_frame(tmp_path):
    write_uint(tmp_path / "d_1.png", levels(16, (4, 6, 3), 255, np.uint8))
    write_uint(tmp_path / "d_2.png", levels(17, (4, 6, 3), 65535, np.uint16))
    with pytest.raises(FramestyleError, match=r"d_2.png: 16-bit samples but d_1.png has 8-bit"):
        open_source(tmp_path)


def test_a_broken_link_among_the_frames_is_refused_not_taken_for_a_gap(tmp_path):
    for k in (1, 3):
        write_uint(tmp_path / f"f_{k}.png", levels(k, (4, 6, 3), 255, np.uint8))
    (tmp_path / "f_2.png").symlink_to(tmp_path / "gone.png")
    with pytest.raises(FramestyleError, match=r"f_2.png: a broken link \(to .*gone.png\)"):
        open_source(tmp_path)


@pytest.mark.parametrize("x, y, width, height", [(8, 4, 12, 6), (-2, -1, 24, 10)])
def test_an_exr_is_its_display_window_with_the_data_window_placed_in_it(tmp_path, x, y, width, height):
    # OpenEXR keeps a data window (the pixels stored) and a display window (the picture); a
    # renderer crops the data to what is lit, or stores overscan beyond the picture (Kainz,
    # Bogart et al., "Technical Introduction to OpenEXR", from memory). Written with OpenImageIO.
    import OpenImageIO as oiio

    data = np.random.default_rng(5).random((height, width, 3)).astype(np.float32)
    spec = oiio.ImageSpec(width, height, 3, oiio.FLOAT)
    spec.x, spec.y = x, y
    spec.full_x, spec.full_y, spec.full_width, spec.full_height = 0, 0, 20, 8
    out = oiio.ImageOutput.create(str(tmp_path / "cg_0001.exr"))
    assert out.open(str(tmp_path / "cg_0001.exr"), spec) and out.write_image(data) and out.close()
    source = open_source(tmp_path)
    assert (source.width, source.height) == (20, 8)
    picture = np.zeros((8, 20, 3), np.float32)
    for row in range(height):
        for col in range(width):
            if 0 <= y + row < 8 and 0 <= x + col < 20:
                picture[y + row, x + col] = data[row, col]
    np.testing.assert_array_equal(read_frame(source, 0), picture)


def test_exr_half_float_luminance_file_reads_as_gray_rgb(tmp_path):
    luminance = np.random.default_rng(8).uniform(-1, 8, (4, 6)).astype(np.float16)
    write_exr_by_hand(tmp_path / "y_1.exr", {"Y": luminance}, pixel_type=1)
    image = read_frame(open_source(tmp_path), 0)
    for channel in range(3):
        np.testing.assert_array_equal(image[..., channel], luminance.astype(np.float32))


def test_exr_float_round_trip_is_exact_and_not_clipped(tmp_path):
    values = np.random.default_rng(9).normal(0.5, 3.0, (6, 5, 3)).astype(np.float32)
    write_image(tmp_path / "out_1.exr", values, bit_depth=32)
    np.testing.assert_array_equal(read_frame(open_source(tmp_path), 0), values)


def test_exr_half_round_trip_is_within_half_precision(tmp_path):
    values = np.random.default_rng(10).uniform(-2, 6, (6, 5, 3)).astype(np.float32)
    write_image(tmp_path / "out_1.exr", values, bit_depth=16)
    source = open_source(tmp_path)
    assert source.bit_depth == 32  # half samples are widened to float on reading
    # IEEE 754 binary16: 10-bit fraction, so relative spacing 2**-10 (one ulp bound allows
    # for the encoder's own rounding direction).
    np.testing.assert_allclose(read_frame(source, 0), values, rtol=2**-10, atol=2**-24)


# ----- video ----------------------------------------------------------------------------


def test_video_count_fps_size_and_audio_are_reported(clip):
    source = open_source(clip)
    assert source.kind == "video"
    assert source.count == 24 and source.fps == 24.0
    assert (source.width, source.height, source.bit_depth) == (64, 48, 8)
    assert not source.has_alpha and "Audio:" in probe(clip)
    assert source.names[0] == "frame_000000" and source.names[23] == "frame_000023"
    assert source.numbers == tuple(range(24)) and source.gaps == ()
    # Reference: imageio-ffmpeg's own frame counter.
    assert imageio_ffmpeg.count_frames_and_secs(str(clip))[0] == source.count


def test_video_frames_match_a_sequential_read_from_any_start(clip):
    source = open_source(clip)
    sequential = [frame for _, frame in iter_frames(source)]
    assert len(sequential) == 24
    # Reference: imageio-ffmpeg's reader (constant frame rate clip, so no resampling).
    reader = imageio_ffmpeg.read_frames(str(clip))
    next(reader)
    reference = [np.frombuffer(b, np.uint8).reshape(48, 64, 3) / np.float32(255) for b in reader]
    for ours, theirs in zip(sequential, reference, strict=True):
        np.testing.assert_array_equal(ours, theirs)
    from_ten = list(iter_frames(source, start=10))
    assert [i for i, _ in from_ten] == list(range(10, 24))
    for index, frame in from_ten:
        np.testing.assert_array_equal(frame, sequential[index])
    assert [i for i, _ in iter_frames(source, 10, 12)] == [10, 11]
    np.testing.assert_array_equal(read_frame(source, 23), sequential[23])
    # Every frame differs from every other, so matching the right index means something.
    assert all(not np.array_equal(a, b) for i, a in enumerate(sequential) for b in sequential[:i])


def test_picked_frames_are_the_frames_read_one_by_one_in_order(clip, tmp_path):
    for number in range(1, 7):
        write_uint(tmp_path / f"frame_{number}.png", np.full((6, 5, 3), 10 * number, np.uint8))
    for source in (open_source(clip), open_source(tmp_path)):
        picked = list(pick_frames(source, [5, 1, 5, 3]))
        assert [i for i, _ in picked] == [1, 3, 5]
        for index, frame in picked:
            np.testing.assert_array_equal(frame, read_frame(source, index))
        assert list(pick_frames(source, [])) == []
        with pytest.raises(IndexError):
            list(pick_frames(source, [2, 99]))


def test_variable_frame_rate_video_is_read_one_frame_per_decoded_frame(tmp_path):
    path = tmp_path / "vfr.mp4"
    # A 0.3 s jump in timestamps after frame 10: a constant-rate reader would add copies.
    ffmpeg("-f", "lavfi", "-i", "testsrc2=size=32x24:rate=24", "-frames:v", "20",
           "-vf", r"setpts=N/24/TB+if(gte(N\,10)\,0.3/TB\,0)", "-fps_mode", "vfr",
           "-c:v", "libx264", "-pix_fmt", "yuv420p", str(path))
    source = open_source(path)
    assert source.count == 20 == imageio_ffmpeg.count_frames_and_secs(str(path))[0]
    sequential = [frame for _, frame in iter_frames(source)]
    assert len(sequential) == 20
    for index, frame in iter_frames(source, start=12):
        np.testing.assert_array_equal(frame, sequential[index])
    # delivered at its commonest rate, an edit rate (ffmpeg's average would be 20 frames in 1.1 s),
    # and said: after the jump (0.3 s on the encoder's 1/24 s time base: 7 frame times) the frames
    # stand 292 ms from their own times
    assert source.fps == 24.0 and source.video.drift == pytest.approx(7 / 24)
    assert [line for line in sequence_warnings(source) if "variable frame rate" in line and "292 ms" in line]


def test_an_evenly_timed_video_gets_no_frame_rate_warning(clip):
    assert open_source(clip).video.drift == 0 and sequence_warnings(open_source(clip)) == []


@pytest.mark.parametrize("size, matrix", [("1280x720", "bt709"), ("640x480", "bt470bg")])
def test_an_untagged_video_is_decoded_with_hds_or_sds_matrix(tmp_path, size, matrix):
    # Encoded with BT.709 (HD) or BT.601 (SD) and its colour tags set to "unspecified" (2,
    # ITU-T H.264 Table E-5): players decode untagged HD as BT.709 (common practice), ffmpeg's
    # own default is BT.601. The two matrices put an orange 20-40 levels apart (ITU-R BT.709 and
    # BT.601 luma weights), so a flat field tells them apart.
    path = tmp_path / "untagged.mp4"
    ffmpeg("-f", "lavfi", "-i", f"color=c=0xE6781E:size={size}:rate=10", "-frames:v", "1",
           "-vf", f"scale=out_color_matrix={matrix}:out_range=tv,format=yuv420p", "-c:v", "libx264", "-qp", "0",
           "-bsf:v", "h264_metadata=matrix_coefficients=2:colour_primaries=2:transfer_characteristics=2", str(path))
    assert "bt709" not in probe(path) and "bt470bg" not in probe(path)
    decoded = read_frame(open_source(path), 0)
    np.testing.assert_allclose(decoded[8, 8] * 255, [0xE6, 0x78, 0x1E], atol=3)


def test_an_anamorphic_video_keeps_its_pixel_aspect_in_the_working_frame_and_the_videos(tmp_path):
    # 2:1 pixels (a 2x anamorphic squeeze): shown 256 wide, so the network works at 128x36 in
    # square pixels and the videos say SAR 2:1 (ffmpeg's report) to show at the source's shape
    path = tmp_path / "squeezed.mp4"
    ffmpeg("-f", "lavfi", "-i", "testsrc2=size=128x72:rate=24,setsar=2", "-frames:v", "2", "-c:v", "libx264",
           "-pix_fmt", "yuv420p", str(path))
    source = open_source(path)
    assert source.pixel_aspect == 2
    assert working_size(source.width, source.height, None, 16, source.pixel_aspect) == (128, 36)
    frames = []
    for index, frame in iter_frames(source):
        frames.append(tmp_path / frame_name(source, index))
        write_image(frames[-1], frame)
    write_video(frames, 24, tmp_path / "out.mp4", pixel_aspect=source.pixel_aspect)
    write_prores(frames, 24, tmp_path / "out.mov", pixel_aspect=source.pixel_aspect)
    for out in ("out.mp4", "out.mov"):
        assert "SAR 2:1 DAR 32:9" in probe(tmp_path / out)
        assert open_source(tmp_path / out).pixel_aspect == 2


def test_frames_with_alpha_go_into_the_videos_over_black(tmp_path):
    # the videos have no alpha: a title over transparency shows over black, not its hidden colour
    rgba = np.zeros((48, 64, 4), np.float32)
    rgba[..., :3] = (0.2, 0.6, 0.8)
    rgba[:, :32, 3] = 1.0
    paths = [tmp_path / f"t_{n}.png" for n in range(2)]
    for path in paths:
        write_image(path, rgba)
    write_video(paths, 24, tmp_path / "out.mp4")
    write_prores(paths, 24, tmp_path / "out.mov")
    for out in ("out.mp4", "out.mov"):
        decoded = read_frame(open_source(tmp_path / out), 1)
        np.testing.assert_allclose(decoded[24, 8], (0.2, 0.6, 0.8), atol=4 / 255)
        np.testing.assert_allclose(decoded[24, 56], 0.0, atol=4 / 255)


def test_a_video_cut_short_is_refused_not_read_as_a_shorter_clip(tmp_path):
    # Its index (moov at the front: faststart) promises 48 frames; the cut-off file decodes
    # about half of them without ffmpeg failing, and says "partial file".
    path = tmp_path / "whole.mp4"
    ffmpeg("-f", "lavfi", "-i", "testsrc2=size=256x144:rate=24:duration=2", "-c:v", "libx264", "-g", "6",
           "-pix_fmt", "yuv420p", "-movflags", "+faststart", str(path))
    assert open_source(path).count == 48
    data = path.read_bytes()
    (tmp_path / "cut.mp4").write_bytes(data[: len(data) * 6 // 10])
    with pytest.raises(FramestyleError, match="cut.mp4: the file is cut short"):
        open_source(tmp_path / "cut.mp4")


def test_a_matroska_video_cut_short_is_refused_too(tmp_path):
    # Matroska needs no index to play, so ffmpeg decodes what is there and says only "File
    # ended prematurely".
    path = tmp_path / "whole.mkv"
    ffmpeg("-f", "lavfi", "-i", "testsrc2=size=96x72:rate=24:duration=1", "-c:v", "mjpeg", str(path))
    assert open_source(path).count == 24
    data = path.read_bytes()
    (tmp_path / "cut.mkv").write_bytes(data[: len(data) * 55 // 100])
    with pytest.raises(FramestyleError, match=r"cut.mkv: the file is cut short \(ffmpeg: File ended prematurely\)"):
        open_source(tmp_path / "cut.mkv")


def test_10_bit_video_is_read_with_16_bit_precision(tmp_path):
    # a smooth 16-bit ramp, coded at 10 bits (ffmpeg's lavfi "gradients" picks random colours
    # each run, now and then nearly one flat colour: 78 distinct values once)
    ramp = tmp_path / "ramp.png"
    y, x = np.mgrid[0:48, 0:64]
    cv2.imwrite(str(ramp), (np.dstack([x / 63, y / 47, (x + y) / 110]) * 65535).astype(np.uint16))
    path = tmp_path / "deep.mkv"
    ffmpeg("-loop", "1", "-i", str(ramp), "-frames:v", "2", "-c:v", "libx264", "-pix_fmt", "yuv420p10le", str(path))
    source = open_source(path)
    assert source.bit_depth == 16
    image = read_frame(source, 0)
    assert len(np.unique(image)) > 256
    reader = imageio_ffmpeg.read_frames(str(path), pix_fmt="rgb48le", bits_per_pixel=48)
    next(reader)
    reference = np.frombuffer(next(reader), "<u2").reshape(48, 64, 3) / np.float32(65535)
    reader.close()
    np.testing.assert_array_equal(image, reference)


def test_a_rotated_video_is_read_upright_without_a_word(tmp_path, capfd, caplog):
    ffmpeg = imageio_ffmpeg.get_ffmpeg_exe()
    plain, turned = tmp_path / "plain.mp4", tmp_path / "phone.mp4"
    subprocess.run([ffmpeg, "-v", "error", "-f", "lavfi", "-i", "testsrc2=size=128x72:rate=12", "-t", "0.5",
                    "-pix_fmt", "yuv420p", "-c:v", "libx264", str(plain)], check=True)
    # a phone's portrait clip: landscape pixels with a display matrix turning them 90°
    subprocess.run([ffmpeg, "-v", "error", "-display_rotation", "90", "-i", str(plain), "-c", "copy", str(turned)],
                   check=True)
    source = open_source(turned)
    assert (source.width, source.height) == (72, 128) and read_frame(source, 0).shape == (128, 72, 3)
    assert capfd.readouterr().err == "" and not caplog.records  # imageio-ffmpeg's size warning is expected


def test_video_with_alpha_gives_alpha(tmp_path):
    path = tmp_path / "alpha.mov"
    ffmpeg("-f", "lavfi", "-i", "color=c=red@0.5:size=16x8:rate=10,format=rgba", "-frames:v", "3",
           "-c:v", "png", str(path))
    source = open_source(path)
    assert source.has_alpha
    assert read_frame(source, 2)[0, 0].tolist() == [1.0, 0.0, 0.0]
    np.testing.assert_allclose(read_alpha(source, 2), 128 / 255, atol=1 / 255)


def test_write_video_keeps_every_frame_and_the_audio(clip, tmp_path):
    source = open_source(clip)
    paths = []
    for index, frame in iter_frames(source):
        paths.append(tmp_path / frame_name(source, index))
        write_image(paths[-1], frame)
    out = tmp_path / "out.mp4"
    write_video(paths, source.fps, out, audio_from=clip)
    assert imageio_ffmpeg.count_frames_and_secs(str(out))[0] == 24
    report = probe(out)
    assert "Audio: aac" in report and "h264" in report and "yuv420p" in report
    result = open_source(out)
    assert (result.count, result.fps) == (24, 24.0)
    difference = np.abs(read_frame(result, 5) - read_frame(source, 5))
    assert difference.mean() < 0.03  # CRF 18 on a busy 64x48 pattern
    assert [p.name for p in tmp_path.iterdir() if p.name.startswith(".")] == []


def test_write_video_keeps_saturated_colours_and_tags_them_bt709(tmp_path):
    quadrants = np.zeros((48, 64, 3), np.float32)
    quadrants[:24, :32] = (1, 0, 0)
    quadrants[:24, 32:] = (0, 1, 0)
    quadrants[24:, :32] = (0, 0, 1)
    quadrants[24:, 32:] = (1, 1, 0)
    paths = [tmp_path / f"f_{n}.png" for n in range(3)]
    for path in paths:
        write_image(path, quadrants)
    out = tmp_path / "out.mp4"
    write_video(paths, 24, out)
    # ffmpeg reports "(tv, bt709, progressive)" when matrix, primaries and transfer are all BT.709.
    assert "yuv420p(tv, bt709, progressive)" in probe(out)
    decoded = read_frame(open_source(out), 1)
    # Flat fields survive 4:2:0 and CRF 18 nearly exactly; a BT.601/BT.709 matrix mix-up
    # would shift these primaries by several percent (ITU-R BT.601 vs BT.709 luma weights).
    for y, x in [(12, 16), (12, 48), (36, 16), (36, 48)]:
        np.testing.assert_allclose(decoded[y, x], quadrants[y, x], atol=4 / 255)


def test_write_video_keeps_every_frame_when_the_audio_is_shorter(tmp_path):
    clip = tmp_path / "short_audio.mkv"
    ffmpeg("-f", "lavfi", "-i", "testsrc2=size=32x24:rate=24", "-f", "lavfi", "-i", "sine=duration=0.4",
           "-frames:v", "24", "-c:v", "libx264", "-c:a", "flac", str(clip))
    source = open_source(clip)
    paths = []
    for index, frame in iter_frames(source):
        paths.append(tmp_path / frame_name(source, index))
        write_image(paths[-1], frame)
    out = tmp_path / "out.mp4"
    write_video(paths, source.fps, out, audio_from=clip)  # FLAC is re-encoded to AAC
    assert "Audio: aac" in probe(out)
    assert imageio_ffmpeg.count_frames_and_secs(str(out))[0] == 24


def test_write_video_handles_odd_sizes_and_ntsc_rates_without_audio(tmp_path):
    paths = []
    for n in range(5):
        paths.append(tmp_path / f"f_{n}.png")
        write_uint(paths[-1], np.full((47, 63, 3), 40 * n, np.uint8))
    out = tmp_path / "out.mp4"
    write_video(paths, 23.98, out)  # ffmpeg reports 24000/1001 as "23.98"
    result = open_source(out)
    assert (result.count, result.width, result.height) == (5, 62, 46)
    assert result.fps == 24000 / 1001
    assert "Audio:" not in probe(out)


def test_write_video_failure_names_the_output_and_leaves_nothing(tmp_path):
    bad = tmp_path / "f_1.png"
    bad.write_text("not an image")
    out = tmp_path / "out.mp4"
    with pytest.raises(FramestyleError, match="out.mp4"):
        write_video([bad], 24, out)
    assert sorted(p.name for p in tmp_path.iterdir()) == ["f_1.png"]


def test_write_video_names_a_missing_frame(tmp_path):
    with pytest.raises(FramestyleError, match="gone_7.png"):
        write_video([tmp_path / "gone_7.png"], 24, tmp_path / "out.mp4")


# ----- timecode and the ProRes hand-off -------------------------------------------------


@pytest.fixture(scope="module")
def tc_clip(tmp_path_factory) -> Path:
    """1 s at 29.97 fps (30 frames), 64x48 H.264 + AAC tone, tagged 01:00:00;00 drop-frame by ffmpeg."""
    path = tmp_path_factory.mktemp("tc") / "tagged.mp4"
    ffmpeg("-f", "lavfi", "-i", "testsrc2=size=64x48:rate=30000/1001,hue=H=0.25*n", "-f", "lavfi",
           "-i", "sine=frequency=440:sample_rate=48000", "-frames:v", "30", "-t", "1.001", "-c:v", "libx264",
           "-pix_fmt", "yuv420p", "-c:a", "aac", "-timecode", "01:00:00;00", str(path))
    return path


def frame_files(source, folder: Path) -> list[Path]:
    paths = []
    for index, frame in iter_frames(source):
        paths.append(folder / frame_name(source, index))
        write_image(paths[-1], frame)
    return paths


def test_timecode_tag_written_by_ffmpeg_is_read_back(tc_clip, tmp_path):
    # ffmpeg writes -timecode as a QuickTime tmcd track in .mp4/.mov and a TIMECODE tag in .mkv.
    source = open_source(tc_clip)
    assert source.start_timecode == "01:00:00;00"
    clock = source_timecode(source)
    assert clock.fps == 30000 / 1001 and clock.drop_frame
    assert clock.label(29) == "01:00:00;29"
    mkv = tmp_path / "tagged.mkv"
    ffmpeg("-f", "lavfi", "-i", "testsrc2=size=32x24:rate=25", "-frames:v", "3", "-c:v", "ffv1",
           "-timecode", "10:00:00:00", str(mkv))
    assert source_timecode(open_source(mkv)).label(2) == "10:00:00:02"


def test_drop_frame_tag_runs_across_a_minute_boundary(tmp_path):
    # SMPTE ST 12-1 drop-frame: 00:00:59;28 + 2 frames is 00:01:00;02 (numbers 00, 01 skipped).
    path = tmp_path / "minute.mov"
    ffmpeg("-f", "lavfi", "-i", "testsrc2=size=32x24:rate=30000/1001", "-frames:v", "4", "-c:v", "libx264",
           "-timecode", "00:00:59;28", str(path))
    clock = source_timecode(open_source(path))
    assert [clock.label(k) for k in range(4)] == ["00:00:59;28", "00:00:59;29", "00:01:00;02", "00:01:00;03"]


def test_start_timecode_option_overrides_the_tag_and_labels_folders(tc_clip, tmp_path):
    assert source_timecode(open_source(tc_clip), start_timecode="00:59:59;00").label(30) == "01:00:00;00"
    for n in (1001, 1002):
        write_uint(tmp_path / f"plate_{n}.png", np.zeros((4, 4, 3), np.uint8))
    folder = open_source(tmp_path)
    assert folder.start_timecode is None and folder.numbers == (1001, 1002)
    assert source_timecode(folder).label(1) == "00:00:00:01"  # 24 fps, from zero
    assert source_timecode(folder, fps=25, start_timecode="01:00:00:24").label(1) == "01:00:01:00"
    with pytest.raises(FramestyleError, match="start timecode: '01:00:00:24' is not a timecode at 24"):
        source_timecode(folder, start_timecode="01:00:00:24")


def test_impossible_timecode_tag_is_named(tmp_path):
    path = tmp_path / "odd_tag.mkv"
    ffmpeg("-f", "lavfi", "-i", "testsrc2=size=32x24:rate=25", "-frames:v", "2", "-c:v", "ffv1",
           "-metadata", "timecode=01:00:00:30", str(path))
    with pytest.raises(FramestyleError, match=r"odd_tag.mkv: timecode tag: '01:00:00:30' is not a timecode at 25"):
        source_timecode(open_source(path))
    assert source_timecode(open_source(path), start_timecode="01:00:00:00").label(0) == "01:00:00:00"


def test_prores_hand_off_is_422_hq_10_bit_with_audio_and_timecode(tc_clip, tmp_path):
    source = open_source(tc_clip)
    out = tmp_path / "hand_off.mov"
    write_prores(frame_files(source, tmp_path), source.fps, out, audio_from=tc_clip,
                 start_timecode=source.start_timecode)
    report = probe(out)
    # ffmpeg's own probe of the file (the binary imageio-ffmpeg ships). Apple ProRes white
    # paper: ProRes 422 HQ is fourcc "apch", 10-bit 4:2:2.
    video = next(line for line in report.splitlines() if "Video:" in line)
    assert "prores (HQ) (apch" in video and "yuv422p10le(tv, bt709, progressive)" in video
    assert "29.97 fps" in video
    assert "Audio: pcm_s24le" in report and "48000 Hz" in report
    assert "timecode        : 01:00:00;00" in report
    assert "major_brand     : qt" in report  # a QuickTime file
    # SMPTE RDD 36 frame header (from memory): "icpf", header size, reserved, version, then
    # the 4-byte encoder identifier, here Apple's "apl0".
    data = out.read_bytes()
    assert data[data.index(b"icpf") + 8:][:4] == b"apl0"
    result = open_source(out)
    assert (result.count, result.fps, result.start_timecode) == (30, 30000 / 1001, "01:00:00;00")
    assert result.bit_depth == 16  # 10-bit samples, read at 16-bit precision
    # A busy 64x48 pattern comes back close; most of the error is 4:2:2 chroma on sharp edges.
    assert np.abs(read_frame(result, 7) - read_frame(source, 7)).mean() < 0.02
    # The audio is cut at the last frame's end: 30 frames at 30000/1001 = 1.001 s.
    seconds = float(re.search(r"Duration: 00:00:(\d+\.\d+)", report)[1])
    assert seconds == pytest.approx(1.001, abs=0.02)
    assert [p.name for p in tmp_path.iterdir() if p.name.startswith(".")] == []


def test_prores_keeps_every_frame_and_saturated_colours_of_an_odd_sized_folder(tmp_path):
    quadrants = np.zeros((47, 63, 3), np.float32)
    quadrants[:24, :32], quadrants[:24, 32:] = (1, 0, 0), (0, 1, 0)
    quadrants[24:, :32], quadrants[24:, 32:] = (0, 0, 1), (1, 1, 0)
    paths = [tmp_path / f"f_{n}.png" for n in range(5)]
    for path in paths:
        write_image(path, quadrants)
    out = tmp_path / "plate.mov"
    write_prores(paths, 24, out, start_timecode="00:59:58:00")
    result = open_source(out)
    assert (result.count, result.width, result.height, result.fps) == (5, 62, 47, 24.0)
    assert result.start_timecode == "00:59:58:00" and "Audio:" not in probe(out)
    # Flat fields survive 10-bit 4:2:2 nearly exactly; a BT.601/BT.709 matrix mix-up would
    # shift these primaries by several percent (ITU-R BT.601 vs BT.709 luma weights).
    decoded = read_frame(result, 2)
    for y, x in [(10, 12), (10, 50), (36, 12), (36, 50)]:
        np.testing.assert_allclose(decoded[y, x], quadrants[y, x], atol=2 / 255)


def test_prores_refuses_other_containers_and_bad_timecode_leaving_nothing(tmp_path):
    frame = tmp_path / "f_1.png"
    write_uint(frame, np.zeros((4, 4, 3), np.uint8))
    with pytest.raises(FramestyleError, match=r"hand_off.mp4: a ProRes hand-off is a QuickTime file"):
        write_prores([frame], 24, tmp_path / "hand_off.mp4")
    with pytest.raises(FramestyleError, match=r"hand_off.mov: start timecode: '01:00:00;00' is drop-frame"):
        write_prores([frame], 24, tmp_path / "hand_off.mov", start_timecode="01:00:00;00")
    assert sorted(p.name for p in tmp_path.iterdir()) == ["f_1.png"]


def test_h264_preview_carries_the_start_timecode_too(tmp_path):
    frame = tmp_path / "f_1.png"
    write_uint(frame, np.zeros((4, 4, 3), np.uint8))
    write_video([frame, frame], 25, tmp_path / "preview.mp4", start_timecode="10:00:00:00")
    assert open_source(tmp_path / "preview.mp4").start_timecode == "10:00:00:00"


# ----- bad inputs -----------------------------------------------------------------------


def test_missing_path_is_named(tmp_path):
    with pytest.raises(FramestyleError, match="no_such_clip"):
        open_source(tmp_path / "no_such_clip")


def test_folder_without_frames_is_named(tmp_path):
    empty = tmp_path / "empty_shot"
    empty.mkdir()
    (empty / "readme.txt").write_text("no frames here")
    with pytest.raises(FramestyleError, match="empty_shot"):
        open_source(empty)


def test_frame_of_another_size_is_named_at_open(tmp_path):
    write_uint(tmp_path / "f_1.png", np.zeros((4, 4, 3), np.uint8))
    write_uint(tmp_path / "f_2.png", np.zeros((4, 5, 3), np.uint8))
    with pytest.raises(FramestyleError, match="f_2.png.*5x4"):
        open_source(tmp_path)


def test_frame_resized_after_open_is_named_when_read(tmp_path):
    for n in (1, 2):
        write_uint(tmp_path / f"f_{n}.png", np.zeros((4, 4, 3), np.uint8))
    source = open_source(tmp_path)
    write_uint(tmp_path / "f_2.png", np.zeros((6, 4, 3), np.uint8))
    with pytest.raises(FramestyleError, match="f_2.png"):
        read_frame(source, 1)


def test_zero_byte_frame_is_named(tmp_path):
    write_uint(tmp_path / "f_1.png", np.zeros((4, 4, 3), np.uint8))
    (tmp_path / "f_2.png").write_bytes(b"")
    with pytest.raises(FramestyleError, match="f_2.png.*empty"):
        open_source(tmp_path)


def test_frame_of_random_bytes_is_named(tmp_path):
    write_uint(tmp_path / "f_1.png", np.zeros((4, 4, 3), np.uint8))
    (tmp_path / "f_2.png").write_bytes(np.random.default_rng(11).bytes(500))
    with pytest.raises(FramestyleError, match="f_2.png"):
        open_source(tmp_path)


def test_a_frame_this_user_may_not_read_is_said_so(tmp_path, monkeypatch):
    # a sweep as an unprivileged user (chmod 000): OpenImageIO said only "Could not open file";
    # as root, who may read anything, the refusal is stood in for
    from framestyle.io import stills

    write_uint(tmp_path / "f_1.png", levels(12, (64, 64, 3), 255, np.uint8))
    locked = tmp_path / "f_1.png"
    real = os.access
    monkeypatch.setattr(os, "access", lambda path, mode, **kw: Path(path) != locked and real(path, mode, **kw))
    monkeypatch.setattr(stills.oiio.ImageInput, "open", lambda *args: None)
    with pytest.raises(FramestyleError, match=r"f_1.png: not readable \(permission denied\)"):
        read_image(locked)


def test_truncated_frame_is_named_when_read_in_one_line(tmp_path, capfd):
    write_uint(tmp_path / "f_1.png", levels(12, (64, 64, 3), 255, np.uint8))
    data = (tmp_path / "f_1.png").read_bytes()
    (tmp_path / "f_2.png").write_bytes(data[: len(data) // 2])  # header intact, pixels cut off
    source = open_source(tmp_path)
    with pytest.raises(FramestyleError, match=r"f_2.png: cannot decode the image \(.*end of file") as caught:
        read_frame(source, 1)
    assert "\n" not in str(caught.value)
    assert capfd.readouterr().err == ""  # libpng's own message is in ours, not on the terminal
    np.testing.assert_array_equal(read_frame(source, 0), levels(12, (64, 64, 3), 255, np.uint8) / np.float32(255))


def test_text_file_given_as_video_is_named(tmp_path):
    path = tmp_path / "holiday.mp4"
    path.write_text("this is not a video\n" * 20)
    with pytest.raises(FramestyleError, match="holiday.mp4"):
        open_source(path)


def test_single_image_given_as_input_is_refused(tmp_path):
    write_uint(tmp_path / "still.png", np.zeros((4, 4, 3), np.uint8))
    with pytest.raises(FramestyleError, match="still.png"):
        open_source(tmp_path / "still.png")


def test_out_of_range_index_is_refused(clip):
    source = open_source(clip)
    with pytest.raises(IndexError):
        read_frame(source, 24)
    with pytest.raises(IndexError):
        iter_frames(source, 5, 30)


# ----- writing frames -------------------------------------------------------------------


def test_write_image_16_bit_png_round_trip_is_exact(tmp_path):
    expected = levels(13, (8, 9, 3), 65535, np.uint16)
    write_image(tmp_path / "f_1.png", expected / 65535.0, bit_depth=16)
    np.testing.assert_array_equal(cv2_rgb(tmp_path / "f_1.png"), expected)  # reference: OpenCV's decode
    np.testing.assert_array_equal(read_frame(open_source(tmp_path), 0), expected / np.float32(65535))


def test_write_image_8_bit_clips_and_rounds_to_nearest_level(tmp_path):
    image = np.array([[[-0.2, 0.0, 0.25], [0.5, 1.0, 1.3]]], np.float32)
    write_image(tmp_path / "f.png", image)
    # 0.25 * 255 = 63.75 -> 64; 0.5 * 255 = 127.5 -> 128 (round half to even)
    assert cv2_rgb(tmp_path / "f.png").tolist() == [[[0, 0, 64], [128, 255, 255]]]


def test_write_image_16_bit_tiff_round_trip_is_exact(tmp_path):
    expected = levels(14, (8, 9, 3), 65535, np.uint16)
    write_image(tmp_path / "f_1.tiff", expected / 65535.0, bit_depth=16)
    np.testing.assert_array_equal(cv2_rgb(tmp_path / "f_1.tiff"), expected)


def test_write_image_failure_leaves_the_old_file_and_no_temp_files(tmp_path, monkeypatch):
    import OpenImageIO as oiio

    target = tmp_path / "f_0001.png"
    write_image(target, np.zeros((4, 4, 3), np.float32))
    before = target.read_bytes()

    class Crashing:  # an encoder that dies half way through the file
        def __init__(self, path):
            self.path = path

        def open(self, path, spec):
            return True

        def write_image(self, pixels):
            Path(self.path).write_bytes(b"\x89PNG half written")
            raise RuntimeError("disk full")

    monkeypatch.setattr(oiio.ImageOutput, "create", lambda path: Crashing(path))
    with pytest.raises(RuntimeError, match="disk full"):
        write_image(target, np.ones((4, 4, 3), np.float32))
    assert target.read_bytes() == before
    assert os.listdir(tmp_path) == ["f_0001.png"]

    class Refusing(Crashing):  # an encoder that reports failure instead
        def write_image(self, pixels):
            return False

        def close(self):
            return True

        def geterror(self):
            return "no space left on device"

    monkeypatch.setattr(oiio.ImageOutput, "create", lambda path: Refusing(path))
    with pytest.raises(FramestyleError, match="f_0001.png"):
        write_image(target, np.ones((4, 4, 3), np.float32))
    assert target.read_bytes() == before
    assert os.listdir(tmp_path) == ["f_0001.png"]


@pytest.mark.parametrize(
    ("name", "bit_depth"), [("f.jpg", 8), ("f.png", 32), ("f.exr", 8), ("f", 8)]
)
def test_write_image_refuses_unsupported_format_and_depth(tmp_path, name, bit_depth):
    with pytest.raises(FramestyleError, match="bit depth|cannot write"):
        write_image(tmp_path / name, np.zeros((4, 4, 3), np.float32), bit_depth=bit_depth)
    assert os.listdir(tmp_path) == []


def test_write_image_refuses_images_of_the_wrong_shape_or_with_nan(tmp_path):
    with pytest.raises(ValueError):
        write_image(tmp_path / "f.png", np.zeros((4, 4), np.float32))
    with pytest.raises(ValueError):
        write_image(tmp_path / "f.png", np.full((4, 4, 3), np.nan, np.float32))


# ----- naming and fingerprints ----------------------------------------------------------


def test_frame_name_uses_the_input_stem_or_the_video_index(tmp_path, clip):
    write_uint(tmp_path / "drift_0007.png", np.zeros((4, 4, 3), np.uint8))
    assert frame_name(open_source(tmp_path), 0) == "drift_0007.png"
    assert frame_name(open_source(clip), 10, ".exr") == "frame_000010.exr"


def test_fingerprint_survives_a_copy_but_not_a_content_change(tmp_path):
    shot = tmp_path / "shot"
    shot.mkdir()
    for n in (1, 2, 3):
        write_uint(shot / f"f_{n}.png", levels(n, (8, 8, 3), 255, np.uint8))
    original = fingerprint(open_source(shot))
    assert fingerprint(open_source(shot)) == original
    copy = tmp_path / "copy"
    shutil.copytree(shot, copy)  # new path and modification times, same content
    os.utime(copy / "f_2.png", (0, 0))
    assert fingerprint(open_source(copy)) == original

    data = bytearray((copy / "f_2.png").read_bytes())
    data[-20] ^= 0xFF  # same size, different content
    (copy / "f_2.png").write_bytes(bytes(data))
    assert fingerprint(open_source(copy)) != original

    write_uint(shot / "f_4.png", levels(4, (8, 8, 3), 255, np.uint8))
    assert fingerprint(open_source(shot)) != original


def test_fingerprint_of_a_video_depends_on_its_content_only(clip, tmp_path):
    renamed = tmp_path / "renamed.mp4"
    shutil.copy(clip, renamed)
    source = open_source(renamed)
    before = fingerprint(source)
    assert before == fingerprint(open_source(clip))
    data = bytearray(renamed.read_bytes())
    data[len(data) // 2] ^= 0xFF
    renamed.write_bytes(bytes(data))
    assert fingerprint(source) != before
