import inspect
import json
import re

import cv2
import numpy as np
import pytest

from framestyle.errors import FramestyleError
from framestyle.shots import Shot, shots_from_boundaries
from framestyle.shots.detect import (
    HISTOGRAM_BINS,
    SIGNATURE_WIDTH,
    detect_shots,
    frame_signature,
    signature_distance,
)
from framestyle.shots.lists import apply_overrides, format_shot_table, parse_shot_file, parse_shot_selection, shot_selection
from framestyle.shots.lists import shot_entries
from framestyle.timecode import ClipTimecode

# --- synthetic footage: smooth procedural textures, one palette per shot -----------------

H, W = 64, 96
PALETTES = {
    "sea": [(0.05, 0.15, 0.35), (0.20, 0.55, 0.75), (0.85, 0.95, 1.00)],
    "desert": [(0.35, 0.15, 0.05), (0.80, 0.45, 0.10), (1.00, 0.85, 0.40)],
    "forest": [(0.05, 0.25, 0.05), (0.30, 0.60, 0.20), (0.75, 0.90, 0.45)],
    "dusk": [(0.30, 0.05, 0.30), (0.65, 0.25, 0.60), (0.95, 0.70, 0.90)],
}
GRAIN = 0.02  # per-pixel noise std, like sensor grain, so frames are never identical


def texture(palette: str, seed: int, dx: float = 0.0, dy: float = 0.0, phase: float = 0.0):
    """A smooth pattern (four plane waves) mapped through a three-colour palette."""
    rng = np.random.default_rng(seed)
    yy, xx = np.mgrid[0:H, 0:W].astype(np.float32)
    field = np.zeros((H, W), np.float32)
    for _ in range(4):
        angle, wavelength = rng.uniform(0, np.pi), rng.uniform(18, 50)
        offset = rng.uniform(0, 2 * np.pi)
        along = np.cos(angle) * (xx + dx) + np.sin(angle) * (yy + dy)
        field += np.sin(2 * np.pi * along / wavelength + offset + phase)
    position = np.clip(0.5 + field / 5.0, 0.0, 1.0) * 2  # 0..2 across the three colours
    colours = np.asarray(PALETTES[palette], np.float32)
    low = np.minimum(position.astype(int), 1)
    weight = (position - low)[..., None]
    return colours[low] * (1 - weight) + colours[low + 1] * weight


def with_grain(frame: np.ndarray, rng: np.random.Generator) -> np.ndarray:
    return np.clip(frame + rng.normal(0, GRAIN, frame.shape), 0, 1).astype(np.float32)


def shot_frames(palette: str, seed: int, first: int, count: int) -> list[np.ndarray]:
    """Frames ``first .. first + count - 1`` of a shot drifting slowly (0.5 px/frame)."""
    return [texture(palette, seed, 0.4 * t, 0.3 * t, 0.05 * t) for t in range(first, first + count)]


def starts_of(frames: list[np.ndarray], seed: int = 0, **settings) -> list[int]:
    rng = np.random.default_rng(seed)
    shots = detect_shots([frame_signature(with_grain(f, rng)) for f in frames], **settings)
    return [shot.start for shot in shots]


# --- frame_signature ------------------------------------------------------------------------


def test_signature_is_the_joint_rgb_histogram_of_the_area_downscaled_frame():
    rng = np.random.default_rng(3)
    coarse = rng.random((9, 16, 3), dtype=np.float32)
    frame = cv2.resize(coarse, (640, 360), interpolation=cv2.INTER_CUBIC)
    frame = np.clip(frame, 0, 1)
    frame[0, :8] = 1.0  # the top edge value must land in the last bin
    small = cv2.resize(frame, (SIGNATURE_WIDTH, 90), interpolation=cv2.INTER_AREA)
    # Reference library: numpy's histogramdd (closed last bin, like ours).
    expected, _ = np.histogramdd(small.reshape(-1, 3), bins=HISTOGRAM_BINS, range=[(0, 1)] * 3)
    signature = frame_signature(frame)
    assert signature.shape == (HISTOGRAM_BINS**3 + 16 * 9,) and signature.dtype == np.float32
    colours = signature[: HISTOGRAM_BINS**3]
    np.testing.assert_allclose(colours, expected.ravel() / small.shape[0] / small.shape[1], atol=1e-6)
    # Reference library: OpenCV's calcHist. Its upper range end is open, so compare on a
    # frame without the value 1.0.
    below_one = np.minimum(frame, 0.99)
    small = cv2.resize(below_one, (SIGNATURE_WIDTH, 90), interpolation=cv2.INTER_AREA)
    calc = cv2.calcHist([small], [0, 1, 2], None, [HISTOGRAM_BINS] * 3, [0, 1, 0, 1, 0, 1])
    np.testing.assert_allclose(frame_signature(below_one)[: HISTOGRAM_BINS**3], calc.ravel() / calc.sum(), atol=1e-6)


def test_signature_layout_is_the_bt601_luma_of_16_by_9_cells():
    rng = np.random.default_rng(4)
    frame = rng.random((90, 160, 3), dtype=np.float32)  # 16×9 cells of 10×10 pixels
    # Luma weights of ITU-R BT.601: Y' = 0.299 R' + 0.587 G' + 0.114 B'.
    luma = frame @ np.float32([0.299, 0.587, 0.114])
    cells = luma.reshape(9, 10, 16, 10).mean(axis=(1, 3))
    np.testing.assert_allclose(frame_signature(frame)[HISTOGRAM_BINS**3 :], cells.ravel(), atol=1e-4)


def test_distance_sees_a_new_framing_that_the_colour_histogram_cannot():
    frame = texture("sea", 1)
    swapped = np.concatenate([frame[:, W // 2 :], frame[:, : W // 2]], axis=1)  # same pixels
    a, b = frame_signature(frame), frame_signature(swapped)
    np.testing.assert_allclose(a[: HISTOGRAM_BINS**3], b[: HISTOGRAM_BINS**3], atol=1e-6)
    assert signature_distance(a, b) > 0.05
    assert signature_distance(a, a) == 0


def test_small_frames_are_counted_without_resizing():
    frame = np.zeros((2, 3, 3), np.float32)
    frame[0, 0] = (1.0, 0.0, 0.3)
    signature = frame_signature(frame)
    assert signature[0] == pytest.approx(5 / 6)  # black pixels
    assert signature[(3 * HISTOGRAM_BINS + 0) * HISTOGRAM_BINS + 1] == pytest.approx(1 / 6)


@pytest.mark.parametrize(
    "bad", [np.zeros((4, 4), np.float32), np.zeros((4, 4, 4), np.float32), np.zeros((4, 4, 3), np.uint8)]
)
def test_signature_rejects_frames_that_are_not_float_rgb(bad):
    with pytest.raises(ValueError):
        frame_signature(bad)


# --- detect_shots ---------------------------------------------------------------------------


def test_hard_cuts_are_found_within_one_frame():
    frames = (
        shot_frames("sea", 1, 0, 30)
        + shot_frames("desert", 2, 30, 25)
        + shot_frames("forest", 3, 55, 25)
        + shot_frames("dusk", 4, 80, 20)
    )
    starts = starts_of(frames)
    assert len(starts) == 4
    for found, true_cut in zip(starts[1:], (30, 55, 80)):
        assert abs(found - true_cut) <= 1


def test_fade_through_black_gives_one_boundary_inside_the_fade():
    a, b = shot_frames("sea", 1, 0, 40), shot_frames("desert", 2, 40, 50)
    fade_out = [a[30 + k] * (1 - (k + 1) / 10) for k in range(10)]  # frames 30..39, 39 black
    fade_in = [b[k] * ((k + 1) / 10) for k in range(10)]  # frames 40..49
    starts = starts_of(a[:30] + fade_out + fade_in + b[10:])
    assert len(starts) == 2
    assert 30 <= starts[1] <= 49
    assert abs(starts[1] - 39.5) <= 3  # near the black point, where the shots meet


@pytest.mark.parametrize("length", [12, 24])
def test_a_fade_in_at_the_clips_start_or_out_at_its_end_is_no_boundary(length):
    # nothing is on the far side of the black: the fade opens (closes) the one shot
    a = shot_frames("sea", 1, 0, 50)
    fade_in = [a[k] * (k / length) for k in range(length)] + a[length:]
    assert starts_of(fade_in) == [0]
    fade_out = a[:50 - length] + [a[50 - length + k] * (1 - (k + 1) / length) for k in range(length)]
    assert starts_of(fade_out) == [0]


def test_fade_out_hold_on_black_and_fade_in_is_one_transition():
    a, b = shot_frames("forest", 5, 0, 40), shot_frames("dusk", 6, 0, 40)
    black = [np.zeros((H, W, 3), np.float32)] * 8
    fade_out = [a[30 + k] * (1 - (k + 1) / 8) for k in range(8)]  # frames 30..37
    fade_in = [b[k] * ((k + 1) / 8) for k in range(8)]  # frames 46..53
    starts = starts_of(a[:30] + fade_out + black + fade_in + b[8:])
    assert len(starts) == 2
    assert 37 <= starts[1] <= 46  # on the held black


def test_cross_dissolve_gives_one_boundary_inside_the_dissolve():
    a, b = shot_frames("sea", 1, 0, 100), shot_frames("forest", 3, 0, 100)
    mix = [(k + 1) / 13 for k in range(12)]  # frames 40..51 blend a into b
    frames = a[:40] + [a[40 + k] * (1 - m) + b[40 + k] * m for k, m in enumerate(mix)] + b[52:]
    starts = starts_of(frames)
    assert len(starts) == 2
    assert 40 <= starts[1] <= 51


def test_fast_pan_over_a_wide_panorama_is_not_a_cut():
    # 8 px/frame across a 96 px frame: the view moves a whole frame width in 12 frames.
    frames = [texture("forest", 7, dx=8.0 * t) for t in range(100)]
    assert np.abs(frames[1] - frames[0]).mean() > 0.03  # large motion in pixel terms
    assert starts_of(frames) == [0]


def test_cut_in_the_middle_of_a_fast_pan_is_found():
    frames = [texture("forest", 7, dx=8.0 * t) for t in range(40)]
    frames += [texture("desert", 8, dx=8.0 * t) for t in range(40, 80)]
    starts = starts_of(frames)
    assert len(starts) == 2 and abs(starts[1] - 40) <= 1


def test_slow_colour_change_during_a_long_fast_pan_is_not_a_transition():
    # A 200-frame pan at 16 px/frame over a panorama that turns from sea to forest: the
    # first and last views differ a lot.
    blend = np.arange(W)[None, :, None].astype(np.float32)
    frames = []
    for t in range(200):
        weight = np.clip((blend + 16.0 * t) / 8000.0, 0, 1)
        sea, forest = texture("sea", 7, dx=16.0 * t), texture("forest", 7, dx=16.0 * t)
        frames.append(sea * (1 - weight) + forest * weight)
    assert starts_of(frames) == [0]
    # Its views 48 frames apart differ by more than a transition's ends must: what keeps
    # it whole is that the frames between are no mixes of them (a pan, not a dissolve).
    ends = [frame_signature(frames[k]) for k in (0, 48)]
    assert signature_distance(*ends) > inspect.signature(detect_shots).parameters["gradual_threshold"].default
    assert starts_of(frames, max_transition_length=len(frames)) == [0]


def test_flickering_light_is_not_a_transition():
    gains = np.random.default_rng(5).uniform(0.75, 1.0, 100)  # brightness jumps up to 25 %
    frames = [frame * gain for frame, gain in zip(shot_frames("desert", 2, 0, 100), gains)]
    assert starts_of(frames) == [0]


def test_large_object_sweeping_across_the_frame_is_not_a_cut():
    radius, speed = 26, 6.0  # a red disc as tall as 80 % of the frame, 6 px/frame
    yy, xx = np.mgrid[0:H, 0:W]
    frames, coverage = [], []
    for t, frame in enumerate(shot_frames("sea", 1, 0, int((W + 2 * radius) / speed) + 10)):
        blob = (xx - (t * speed - radius)) ** 2 + (yy - H / 2) ** 2 < radius**2
        frame = frame.copy()
        frame[blob] = (0.9, 0.1, 0.1)
        frames.append(frame)
        coverage.append(blob.mean())
    assert max(coverage) > 0.3 and coverage[0] == coverage[-1] == 0  # enters and leaves
    assert starts_of(frames) == [0]


def test_one_frame_flash_is_not_a_cut():
    # A photographic flash is a classic false cut (common practice): big steps into and
    # out of the flash, but the frames around it match.
    frames = shot_frames("dusk", 4, 0, 60)
    frames[30] = np.ones((H, W, 3), np.float32)
    assert starts_of(frames) == [0]


@pytest.mark.parametrize("length", [1, 2, 3])
def test_a_shot_of_a_few_frames_between_two_others_is_cut_from_them(length):
    # rapid cutting (common practice in music videos): sea, a few frames of desert, dusk.
    # Its two steps stand out only together, as a flash's do, but the picture does not come
    # back after it: an insert, a shot of its own though shorter than min_shot_length.
    frames = shot_frames("sea", 1, 0, 30) + shot_frames("desert", 2, 30, length) + shot_frames("dusk", 4, 30, 30)
    assert starts_of(frames) == [0, 30, 30 + length]
    white = shot_frames("sea", 1, 0, 30) + [np.ones((H, W, 3), np.float32)] * length + shot_frames("dusk", 4, 30, 30)
    assert starts_of(white) == [0, 30, 30 + length]  # white frames between two shots: a shot of their own


def test_static_footage_is_one_shot():
    assert starts_of([texture("desert", 2)] * 50) == [0]


def test_single_frame_is_one_shot():
    assert detect_shots([frame_signature(texture("sea", 1))]) == [Shot(1, 0, 0)]


def test_cuts_closer_than_min_shot_length_keep_only_one():
    frames = shot_frames("sea", 1, 0, 30) + shot_frames("desert", 2, 30, 5)
    frames += shot_frames("dusk", 4, 35, 30)
    assert len(starts_of(frames, min_shot_length=8)) == 2
    assert starts_of(frames, min_shot_length=3) == [0, 30, 35]


def test_detect_shots_rejects_empty_or_mixed_signatures():
    with pytest.raises(ValueError):
        detect_shots([])
    with pytest.raises(ValueError):
        detect_shots([np.zeros(64, np.float32), np.zeros(8, np.float32)])


# --- shot lists and overrides -----------------------------------------------------------


def test_shots_from_boundaries_adds_frame_zero_and_ends_at_the_last_frame():
    assert shots_from_boundaries([10, 25], 40) == [Shot(1, 0, 9), Shot(2, 10, 24), Shot(3, 25, 39)]
    assert shots_from_boundaries([0], 1) == [Shot(1, 0, 0)]
    for bad in ([5, 5], [40], [-1]):
        with pytest.raises(ValueError):
            shots_from_boundaries(bad, 40)


FIFTY = range(50)  # the frame numbers of a 50-frame video (or a folder numbered from 0)
PLATE = range(1001, 1051)  # a 50-frame plate numbered from 1001
TC24 = ClipTimecode(24)


def test_text_shot_file_with_comments_and_blank_lines(tmp_path):
    path = tmp_path / "cuts.txt"
    path.write_text("# harbour clip\n\n12   # close-up\n  30\n", encoding="utf-8")
    assert parse_shot_file(path, FIFTY, TC24) == [Shot(1, 0, 11), Shot(2, 12, 29), Shot(3, 30, 49)]


def test_text_shot_file_speaks_the_source_frame_numbers(tmp_path):
    path = tmp_path / "cuts.txt"
    path.write_text("1001\n1013\n1031\n", encoding="utf-8")
    assert parse_shot_file(path, PLATE, TC24) == [Shot(1, 0, 11), Shot(2, 12, 29), Shot(3, 30, 49)]


def test_json_shot_file_as_printed_by_the_shots_command_round_trips(tmp_path):
    shots = [Shot(1, 0, 11), Shot(2, 12, 29), Shot(3, 30, 49)]
    entries = shot_entries(shots, PLATE, ClipTimecode(25, "10:00:00:00"))
    assert entries[1] == {"shot": 2, "start": 1013, "end": 1030, "frames": 18,
                          "start_timecode": "10:00:00:12", "end_timecode": "10:00:01:04"}
    path = tmp_path / "shots.json"
    path.write_text(json.dumps(entries, indent=2), encoding="utf-8")
    assert parse_shot_file(path, PLATE, TC24) == shots


@pytest.mark.parametrize(
    "content, line, words",
    [
        ("0\n12\nabc\n", 3, "frame number"),
        ("0\n-4\n", 2, "frame number"),
        ("0\n60\n", 2, "frame 60 is outside the clip (frames 0..49)"),
        ("0\n20\n# x\n10\n", 4, "does not come after"),
        ("0\n20\n20\n", 3, "does not come after"),
        ('[\n {"shot": 1, "start": 0, "end": 19},\n {"shot": 2, "start": 20, "end": 29},\n {"shot": 3, "start": 5, "end": 49}\n]',
         4, "does not come after"),
        ('[\n {"shot": 1, "start": 5, "end": 49}\n]', 2, "the first shot starts at 5, not at the clip's first frame 0"),
        ('[\n {"shot": 1, "start": 0, "end": 9},\n {"shot": 2, "start": 5, "end": 49}\n]', 3, "inside the previous shot"),
        ('[{"shot": 1, "start": 0, "end": 9},\n{"shot": 2, "start": 10}]', 2, '"start": FRAME'),
        ('[{"shot": 1, "start": 0, "end": 60}]', 1, "end 60"),
        ('[{"shot": 1, "start": 0, "end": 9},\n{"shot": 2 "start": 10}]', 2, "not valid JSON"),
    ],
)
def test_bad_shot_files_name_the_file_and_line(tmp_path, content, line, words):
    path = tmp_path / "list.txt"
    path.write_text(content, encoding="utf-8")
    with pytest.raises(FramestyleError) as error:
        parse_shot_file(path, FIFTY, TC24)
    assert f"{path}:{line}:" in str(error.value)
    assert words in str(error.value)


def test_shot_file_frame_in_a_gap_of_the_numbering_is_named(tmp_path):
    path = tmp_path / "cuts.txt"
    path.write_text("1001\n1005\n", encoding="utf-8")
    numbers = (1001, 1002, 1003, 1007, 1008)
    with pytest.raises(FramestyleError, match=r"cuts.txt:2: frame 1005 is not in the clip \(frames 1004..1006 are"):
        parse_shot_file(path, numbers, TC24)


@pytest.mark.parametrize("content, words", [("# only a comment\n", "the shot list names no shot start (write 1001"),
                                            ("[]", "the shot list is empty")])
def test_shot_file_without_any_shot_is_rejected(tmp_path, content, words):
    path = tmp_path / "list.txt"
    path.write_text(content, encoding="utf-8")
    with pytest.raises(FramestyleError, match=re.escape(f"{path}: {words}")):
        parse_shot_file(path, PLATE, TC24)


def test_missing_shot_file_is_a_user_error(tmp_path):
    with pytest.raises(FramestyleError, match="missing.txt"):
        parse_shot_file(tmp_path / "missing.txt", FIFTY, TC24)


def test_overrides_add_and_remove_cuts_and_renumber():
    shots = shots_from_boundaries([20, 40], 60)
    changed = apply_overrides(shots, range(60), add_cuts=[10], remove_cuts=[40])
    assert changed == [Shot(1, 0, 9), Shot(2, 10, 19), Shot(3, 20, 59)]
    assert apply_overrides(shots, range(60), add_cuts=[20]) == shots


def test_overrides_speak_the_source_frame_numbers():
    shots = shots_from_boundaries([20, 40], 60)
    changed = apply_overrides(shots, range(1001, 1061), add_cuts=[1011], remove_cuts=[1041])
    assert changed == [Shot(1, 0, 9), Shot(2, 10, 19), Shot(3, 20, 59)]


@pytest.mark.parametrize(
    "add, remove, words",
    [((), (30,), "no shot starts there"), ((), (0,), "frame 0"), ((60,), (), "0..59"), ((20,), (20,), "both")],
)
def test_bad_overrides_are_user_errors(add, remove, words):
    with pytest.raises(FramestyleError, match=words):
        apply_overrides(shots_from_boundaries([20, 40], 60), range(60), add_cuts=add, remove_cuts=remove)


@pytest.mark.parametrize(
    "add, remove, words",
    [((1000,), (), "frame 1000 is outside the clip (frames 1001..1060)"),
     ((1030,), (), "frame 1030 is not in the clip (frames 1026..1035 are missing)"),
     ((), (1001,), "cannot remove the cut at frame 1001: it starts the clip"),
     ((), (1025,), "no shot starts there (shot starts: 1001, 1021, 1046)")],
)
def test_bad_overrides_name_source_frame_numbers(add, remove, words):
    numbers = [*range(1001, 1026), *range(1036, 1061)]  # files 1026-1035 are missing
    shots = shots_from_boundaries([20, 35], 50)
    with pytest.raises(FramestyleError, match=re.escape(words)):
        apply_overrides(shots, numbers, add_cuts=add, remove_cuts=remove)


def test_shot_table_lists_frames_and_smpte_timecodes_of_first_and_last_frame():
    table = format_shot_table(shots_from_boundaries([48], 100), range(100), ClipTimecode(25))
    lines = table.splitlines()
    assert lines[0].split() == ["shot", "first", "last", "frames", "start", "end"]
    # Non-drop 25 fps timecodes (SMPTE ST 12-1): frame 47 is 00:00:01:22, 99 is 00:00:03:24.
    assert lines[1].split() == ["1", "0", "47", "48", "00:00:00:00", "00:00:01:22"]
    assert lines[2].split() == ["2", "48", "99", "52", "00:00:01:23", "00:00:03:24"]
    assert "00:01:00;02" in format_shot_table(shots_from_boundaries([1800], 1900), range(1900), ClipTimecode(29.97))


def test_shot_table_shows_source_numbers_and_the_source_timecode():
    table = format_shot_table(shots_from_boundaries([48], 100), range(1001, 1101), ClipTimecode(25, "01:00:00:00"))
    lines = table.splitlines()
    # 25 fps non-drop (SMPTE ST 12-1): position 48 is 01:00:00:00 + 48 frames = 01:00:01:23.
    assert lines[1].split() == ["1", "1001", "1048", "48", "01:00:00:00", "01:00:01:22"]
    assert lines[2].split() == ["2", "1049", "1100", "52", "01:00:01:23", "01:00:03:24"]


def test_a_shot_selection_reads_lists_ranges_and_open_ranges_and_refuses_the_rest():
    assert parse_shot_selection("2,4-5", 6) == [2, 4, 5]
    assert parse_shot_selection("5-", 6) == [5, 6]  # shot 5 to the last
    assert parse_shot_selection("1-1, 3", 6) == [1, 3]
    for text, words in [("2-1", "runs downward; write 1-2"), (",", "no shot chosen"), ("x", "expected shot numbers"),
                        ("7-", "no shot 7")]:
        with pytest.raises(FramestyleError, match=words):
            parse_shot_selection(text, 6)


def test_shot_numbers_are_written_as_a_selection_reads_them():
    assert shot_selection([6, 2, 4, 5]) == "2,4-6" and shot_selection([1]) == "1"
    for numbers in ([1, 2, 3], [1, 3, 7, 8], [5]):
        assert parse_shot_selection(shot_selection(numbers), 9) == numbers
