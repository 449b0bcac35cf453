"""Tests for framestyle.qc.flashes and flash_plot against WCAG 2.1 SC 2.3.1 and ITU-R BT.1702.

Synthetic sequences are built here with the verdict the standards' definitions give. Sources:
W3C WCAG 2.1, definition "general flash and red flash thresholds" and its notes, definition
"relative luminance"; ITU-R BT.1702 (2005); IEC 61966-2-1 (sRGB).
"""

import json
import math
import weakref

import cv2
import numpy as np
import pytest

from framestyle.finish.colour import linear_to_srgb
from framestyle.qc.flash_plot import plot_flash_timeline
from framestyle.qc.flashes import (
    analyse_flashes,
    flash_geometry,
    is_saturated_red,
    linear_rgb,
    red_value,
    relative_luminance,
)

W, H = 240, 180  # 4:3, filling WCAG's 1024×768 reference screen: 4×3-pixel blocks, 60×60 of them
FPS = 24


def solid(srgb, size=(W, H)) -> np.ndarray:
    """A frame of one sRGB-encoded colour (a grey when ``srgb`` is a number)."""
    return np.broadcast_to(np.asarray(srgb, np.float32), (size[1], size[0], 3)).copy()


def of_luminance(linear: float, size=(W, H)) -> np.ndarray:
    """A grey frame whose relative luminance is ``linear``."""
    return solid(float(linear_to_srgb(linear)), size)


def strobe(a, b, half_period: int, frames: int):
    """``a`` for ``half_period`` frames, then ``b``, and so on: fps / (2 half_period) flashes/s."""
    for i in range(frames):
        yield b if (i // half_period) % 2 else a


def block_patch(geometry, blocks, on: bool) -> np.ndarray:
    """A black frame with the given ``(col0, row0, col1, row1)`` block rectangles white if ``on``."""
    frame = np.zeros((geometry.height, geometry.width, 3), np.float32)
    if on:
        (bw, bh), (x0, y0) = geometry.block_size, geometry.origin
        for c0, r0, c1, r1 in blocks:
            frame[y0 + r0 * bh:y0 + r1 * bh, x0 + c0 * bw:x0 + c1 * bw] = 1.0
    return frame


def patch_strobe(blocks, seconds=2, half_period=3, size=(W, H)):
    """White block rectangles flashing on black at fps / (2 half_period) flashes per second."""
    geometry = flash_geometry(*size)
    off, on = block_patch(geometry, blocks, False), block_patch(geometry, blocks, True)
    return strobe(off, on, half_period, seconds * FPS)


def verdicts(frames, fps=FPS, **options):
    return analyse_flashes(frames, fps, **options).verdicts


# --- relative luminance and the red-flash measure --------------------------------------------


def wcag_relative_luminance(r8: int, g8: int, b8: int) -> float:
    """WCAG 2.1 "relative luminance", written out as the definition states it (0.03928 break)."""

    def channel(c8):
        c = c8 / 255
        return c / 12.92 if c <= 0.03928 else ((c + 0.055) / 1.055) ** 2.4

    return 0.2126 * channel(r8) + 0.7152 * channel(g8) + 0.0722 * channel(b8)


def test_relative_luminance_of_srgb_primaries_and_white_is_the_wcag_weights():
    # WCAG 2.1 "relative luminance": L = 0.2126 R + 0.7152 G + 0.0722 B (the BT.709 / sRGB Y row).
    colours = np.array([[[1, 0, 0], [0, 1, 0], [0, 0, 1], [1, 1, 1], [0, 0, 0]]], np.float32)
    np.testing.assert_allclose(relative_luminance(colours)[0], [0.2126, 0.7152, 0.0722, 1.0, 0.0], atol=1e-6)


def test_relative_luminance_follows_the_wcag_formula_for_every_8_bit_code():
    # WCAG 2.1 "relative luminance" uses the 0.03928 break; IEC 61966-2-1 uses 0.04045. No 8-bit
    # code lies between them (10/255 = 0.0392, 11/255 = 0.0431), so both give the same values.
    codes = np.arange(256)
    greys = (codes / 255).astype(np.float32).reshape(1, -1, 1).repeat(3, axis=2)
    expected = [wcag_relative_luminance(c, c, c) for c in codes]
    np.testing.assert_allclose(relative_luminance(greys)[0], expected, atol=2e-6)
    mixed = np.array([[[200, 30, 90], [12, 250, 7], [64, 128, 255]]], np.float32) / 255
    np.testing.assert_allclose(relative_luminance(mixed)[0],
                               [wcag_relative_luminance(*c) for c in (mixed[0] * 255).round().astype(int)],
                               atol=2e-6)


def test_linear_rgb_clips_values_outside_the_display_range():
    # Display-referred frames: below black shows as black, above white as white.
    frame = np.array([[[-0.5, 1.5, 0.5], [np.nan, 0.0, 1.0]]], np.float32)
    expected = [[0.0, 1.0, wcag_relative_luminance(128, 0, 0) / 0.2126], [0.0, 0.0, 1.0]]
    np.testing.assert_allclose(linear_rgb(frame)[0], expected, atol=1e-6)


@pytest.mark.parametrize("linear,saturated,value", [
    # WCAG 2.1 note (Harding and Binnie 2002): saturated red is R/(R+G+B) >= 0.8, the measure is
    # max(0, R - G - B) * 320 on linear R, G, B. Worked numbers:
    ((1.0, 0.0, 0.0), True, 320.0),  # the sRGB red primary: ratio 1, (1 - 0 - 0) * 320
    ((0.5, 0.05, 0.05), True, 128.0),  # ratio 0.5 / 0.6 = 0.833, (0.5 - 0.1) * 320
    ((0.8, 0.1, 0.1), True, 192.0),  # ratio exactly 0.8 counts ("greater than or equal")
    ((0.5, 0.1, 0.1), False, 96.0),  # ratio 0.714: not saturated, though the measure is positive
    ((0.2, 0.5, 0.0), False, 0.0),  # R - G - B < 0 is set to zero
    ((0.0, 0.0, 0.0), False, 0.0),  # black is not a saturated red
])
def test_red_flash_measure_on_worked_numbers(linear, saturated, value):
    rgb = np.array(linear, np.float32)
    assert bool(is_saturated_red(rgb)) is saturated
    assert float(red_value(rgb)) == pytest.approx(value, rel=1e-5)


# --- general flashes: rate, size of the change, darker state ---------------------------------


def test_full_frame_black_white_at_4_flashes_per_second_fails():
    # WCAG 2.1: more than three general flashes in one second over the whole screen fails; the
    # screen is > 25 % of any 10° field and of the screen (BT.1702).
    result = verdicts(strobe(solid(0.0), solid(1.0), 3, 3 * FPS))
    assert result == {"wcag21": {"general": "fail", "red": "pass"}, "bt1702": {"general": "fail", "red": "pass"}}


def test_full_frame_black_white_at_2_flashes_per_second_passes():
    # WCAG 2.1: "no more than three general flashes ... within any one-second period" passes.
    result = analyse_flashes(strobe(solid(0.0), solid(1.0), 6, 3 * FPS), FPS)
    assert result.passed
    assert result.general.flashes.max() == 2


def test_exactly_three_flashes_per_second_pass():
    # WCAG 2.1: the limit is "more than three"; 6 opposing transitions per second are 3 flashes.
    result = analyse_flashes(strobe(solid(0.0), solid(1.0), 4, 3 * FPS), FPS)
    assert result.general.flashes.max() == 3
    assert result.passed


def test_one_second_window_follows_the_frame_rate():
    # The same 6-frame cycle is 8 flashes/s at 48 fps (fails) and 2 flashes/s at 12 fps (passes).
    frames = list(strobe(solid(0.0), solid(1.0), 3, 96))
    assert verdicts(frames, fps=48)["wcag21"]["general"] == "fail"
    assert verdicts(frames, fps=12)["wcag21"]["general"] == "pass"


def test_a_change_of_10_percent_or_more_with_the_darker_state_above_080_passes():
    # WCAG 2.1: a general flash needs "the relative luminance of the darker image below 0.80".
    bright = analyse_flashes(strobe(of_luminance(0.85), of_luminance(1.0), 3, 2 * FPS), FPS)
    assert bright.passed and bright.general.flashes.max() == 0
    # The same rate and a similar swing with the darker state at 0.75 fails.
    assert verdicts(strobe(of_luminance(0.75), of_luminance(0.95), 3, 2 * FPS))["wcag21"]["general"] == "fail"


def test_a_change_between_bright_states_does_not_count_towards_a_flash():
    # WCAG 2.1: only changes whose darker state is below 0.80 form general flashes. 0.9 -> 1.0
    # (frame 3) is not one; the seven 1.0 <-> 0.5 changes after it (frames 6-24) make 3 flashes
    # in any second, which passes. Counting the bright change as well would make 4.
    levels = [0.9] * 3 + [1.0, 1.0, 1.0, 0.5, 0.5, 0.5] * 3 + [1.0] * 3 + [0.5] * (2 * FPS)
    report = analyse_flashes([of_luminance(v) for v in levels], FPS)
    assert report.general.flashes.max() == 3
    assert report.passed


def test_a_change_below_10_percent_passes():
    # WCAG 2.1: a general flash is a pair of changes "of 10% or more of the maximum relative
    # luminance" (1.0): 0.30 <-> 0.38 is not one; 0.30 <-> 0.42 is.
    small = analyse_flashes(strobe(of_luminance(0.30), of_luminance(0.38), 3, 2 * FPS), FPS)
    assert small.passed and small.general.flashes.max() == 0
    assert verdicts(strobe(of_luminance(0.30), of_luminance(0.42), 3, 2 * FPS))["wcag21"]["general"] == "fail"


def test_a_cut_or_a_slow_fade_is_not_a_flash():
    # WCAG 2.1: a flash is a *pair* of opposing changes, at most three per second allowed.
    cut = [solid(0.0)] * FPS + [solid(1.0)] * FPS
    assert analyse_flashes(cut, FPS).general.flashes.max() == 0
    fade = [solid(0.5 + 0.5 * math.sin(2 * math.pi * i / FPS)) for i in range(3 * FPS)]  # 1 cycle/s
    assert analyse_flashes(fade, FPS).general.flashes.max() == 1


# --- the area rule -----------------------------------------------------------------------------


def test_ten_degree_field_is_341_by_256_on_the_1024_by_768_reference_screen():
    # WCAG 2.1 note: a 341×256 px rectangle on a 1024×768 screen approximates a 10° field.
    assert flash_geometry(1024, 768).field_size == pytest.approx((341, 256))
    # A frame shown full screen: twice the pixels, twice the field; 16:9 fills the width.
    assert flash_geometry(2048, 1536).field_size == pytest.approx((682, 512))
    assert flash_geometry(1280, 720).field_size == pytest.approx((341 * 1.25, 256 * 1.25))
    # Blocks are at least 0.1° (the fine-pattern exception): 3.41×2.56 px on the reference
    # screen, rounded up to 4×3 whole pixels, 85 of them across a field.
    fine = flash_geometry(1024, 768, block_degrees=0.1)
    assert fine.block_size == (4, 3) and fine.field_blocks == (85, 85)
    # Whole blocks are centred; the border left over is narrower than one block.
    wide = flash_geometry(1280, 720)
    assert wide.block_size == (22, 16) and wide.grid == (58, 45) and wide.origin == (2, 0)
    with pytest.raises(ValueError, match="block_degrees"):
        flash_geometry(1024, 768, block_degrees=0.05)


def test_small_flashing_patch_passes_and_large_one_fails():
    # WCAG 2.1: content fails only where the flashing area exceeds 25 % of any 10° field.
    geometry = flash_geometry(W, H)
    assert geometry.field_blocks == (20, 20)  # so 100 blocks are 25 % of a field
    small = analyse_flashes(patch_strobe([(20, 20, 25, 25)]), FPS)  # 25 blocks: 6.25 % of a field
    assert small.passed
    assert small.general.flashes.max() == 4  # it does flash 4 times a second, only too small
    large = analyse_flashes(patch_strobe([(10, 10, 50, 50)]), FPS)  # 1600 blocks: 44 % of the screen
    assert large.verdicts == {"wcag21": {"general": "fail", "red": "pass"},
                              "bt1702": {"general": "fail", "red": "pass"}}


def test_flashing_patch_at_25_percent_of_a_field_passes_and_just_over_fails():
    # WCAG 2.1: "no more than ... 25% of any 10 degree visual field" passes. 100 of 400 blocks is
    # exactly 25 %; one more block inside the same field is 25.25 %.
    at_limit = analyse_flashes(patch_strobe([(20, 20, 30, 30)]), FPS)
    assert float(at_limit.general.field_fraction.max()) == pytest.approx(0.25)
    assert at_limit.verdicts["wcag21"]["general"] == "pass"
    over = analyse_flashes(patch_strobe([(20, 20, 30, 30), (30, 20, 31, 21)]), FPS)
    assert float(over.general.field_fraction.max()) == pytest.approx(0.2525)
    assert over.verdicts["wcag21"]["general"] == "fail"
    # Both are far below a quarter of the screen (BT.1702), which holds 3600 blocks.
    assert over.verdicts["bt1702"]["general"] == "pass"


def test_flashing_area_combines_separate_patches_within_one_field():
    # WCAG 2.1: "the combined area of flashes occurring concurrently" (not necessarily contiguous):
    # two 60-block patches inside one 20×20-block field flash over 30 % of it.
    result = analyse_flashes(patch_strobe([(20, 20, 26, 30), (32, 20, 38, 30)]), FPS)
    assert float(result.general.field_fraction.max()) == pytest.approx(0.30)
    assert result.verdicts["wcag21"]["general"] == "fail"
    # The same patches 30 blocks apart never share a 10° field.
    apart = analyse_flashes(patch_strobe([(0, 20, 6, 30), (50, 20, 56, 30)]), FPS)
    assert float(apart.general.field_fraction.max()) == pytest.approx(0.15)
    assert apart.verdicts["wcag21"]["general"] == "pass"


def test_bt1702_judges_a_quarter_of_the_screen():
    # ITU-R BT.1702: flashes fail where their combined area exceeds a quarter of the screen.
    # 900 of 3600 blocks is exactly 25 % (passes); WCAG 2.1 fails it, a whole field flashes.
    at_limit = analyse_flashes(patch_strobe([(0, 0, 30, 30)]), FPS)
    assert float(at_limit.general.screen_fraction.max()) == pytest.approx(0.25)
    assert at_limit.verdicts == {"wcag21": {"general": "fail", "red": "pass"},
                                 "bt1702": {"general": "pass", "red": "pass"}}
    over = analyse_flashes(patch_strobe([(0, 0, 30, 30), (30, 0, 31, 1)]), FPS)
    assert over.verdicts["bt1702"]["general"] == "fail"


# --- red flashes -------------------------------------------------------------------------------


def test_saturated_red_against_equal_luminance_grey_fails_as_a_red_flash_only():
    # WCAG 2.1 note: a transition to or from saturated red (R/(R+G+B) >= 0.8) with a change of
    # (R-G-B)*320 > 20 is a red transition. sRGB red has L = 0.2126; grey 127/255 has L = 0.2122,
    # so the luminance change (0.0004) is far below 10 %: no general flash.
    red, grey = solid((1.0, 0.0, 0.0)), solid(127 / 255)
    assert abs(relative_luminance(red[:1, :1])[0, 0] - relative_luminance(grey[:1, :1])[0, 0]) < 0.001
    result = analyse_flashes(strobe(grey, red, 3, 3 * FPS), FPS)
    assert result.verdicts == {"wcag21": {"general": "pass", "red": "fail"},
                               "bt1702": {"general": "pass", "red": "fail"}}
    assert result.general.flashes.max() == 0 and result.red.flashes.max() == 4


def test_dim_red_flashes_only_when_the_red_measure_changes_by_more_than_20():
    # WCAG 2.1 note: the change of (R-G-B)*320 must exceed 20. sRGB code 75 is linear 0.0703 red
    # (measure 22.5); code 69 is linear 0.0595 (19.0). Against black, only the first is a red flash.
    for code, expected in ((75, "fail"), (69, "pass")):
        linear = ((code / 255 + 0.055) / 1.055) ** 2.4  # IEC 61966-2-1
        assert (linear * 320 > 20) == (expected == "fail")
        result = verdicts(strobe(solid(0.0), solid((code / 255, 0.0, 0.0)), 3, 2 * FPS))
        assert result["wcag21"] == {"general": "pass", "red": expected}


# --- the exception for fine balanced patterns ----------------------------------------------------


def test_fine_checkerboard_inverting_every_frame_passes():
    # WCAG 2.1 exception: an alternating checkerboard with squares under 0.1° does not violate
    # the thresholds. At 512×384 full screen one pixel is 2 reference pixels: 0.059° × 0.078°.
    size = (512, 384)
    y, x = np.mgrid[:size[1], :size[0]]
    board = np.repeat(((x + y) % 2).astype(np.float32)[..., None], 3, axis=2)
    result = analyse_flashes(strobe(board, 1.0 - board, 1, 2 * FPS), FPS)
    assert result.passed and result.general.flashes.max() == 0


def test_coarse_checkerboard_inverting_is_not_exempt():
    # WCAG 2.1: the exception covers squares under 0.1°; 30-pixel squares at 240×180 are 3.75°.
    y, x = np.mgrid[:H, :W]
    board = np.repeat(((x // 30 + y // 30) % 2).astype(np.float32)[..., None], 3, axis=2)
    assert verdicts(strobe(board, 1.0 - board, 3, 2 * FPS))["wcag21"]["general"] == "fail"


def test_fine_one_pixel_noise_changing_every_frame_passes():
    # WCAG 2.1 exception: "white noise" does not violate the thresholds. Binary (black/white)
    # noise, the hardest kind, at 1024×768 where one pixel is 0.029° × 0.039°.
    rng = np.random.default_rng(7)

    def noise():
        for _ in range(2 * 25):
            yield np.repeat((rng.random((768, 1024, 1)) < 0.5).astype(np.float32), 3, axis=2)

    assert analyse_flashes(noise(), 25).passed


def test_coarse_noise_is_not_exempt():
    # WCAG 2.1: the exception is for *fine* patterns; 6-pixel noise cells at 240×180 are 0.75°.
    rng = np.random.default_rng(3)

    def noise():
        for _ in range(2 * FPS):
            cells = (rng.random((H // 6, W // 6, 1)) < 0.5).astype(np.float32)
            yield np.repeat(np.repeat(np.repeat(cells, 6, 0), 6, 1), 3, axis=2)

    assert verdicts(noise())["wcag21"]["general"] == "fail"


# --- report: worst seconds, JSON, streaming, input checks ------------------------------------


def test_worst_seconds_point_at_the_flashing_second_with_its_timecode():
    # Second 3 (frames 72-95) strobes full frame; second 1 (frames 24-47) flashes a patch of
    # 30 % of a field. The full-frame second comes first, then the patch's.
    geometry = flash_geometry(W, H)
    patch = [(20, 20, 26, 30), (32, 20, 38, 30)]
    frames = [solid(0.0)] * (5 * FPS)
    for i in range(FPS, 2 * FPS):
        frames[i] = block_patch(geometry, patch, on=(i // 3) % 2 == 0)
    for i in range(3 * FPS, 4 * FPS):
        frames[i] = solid(1.0 if (i // 3) % 2 == 0 else 0.0)
    report = analyse_flashes(frames, FPS)
    first, second = report.worst_seconds[:2]
    assert (first.kind, first.flashes, first.field_fraction, first.screen_fraction) == ("general", 4, 1.0, 1.0)
    assert 3 * FPS - 3 <= first.start_frame <= 3 * FPS and first.end_frame < 4 * FPS
    assert first.end_frame - first.start_frame == FPS - 1
    assert first.timecode == f"00:00:02:{first.start_frame - 2 * FPS:02d}"  # SMPTE ST 12-1 at 24 fps
    assert FPS - 3 <= second.start_frame <= FPS and second.field_fraction == pytest.approx(0.30)


def test_worst_seconds_use_the_injected_timecode():
    report = analyse_flashes(strobe(solid(0.0), solid(1.0), 3, 2 * FPS), FPS,
                             timecode=lambda frame: f"frame {frame + 1000}")
    assert report.worst_seconds and all(w.timecode == f"frame {w.start_frame + 1000}" for w in report.worst_seconds)


def test_report_to_dict_is_json_with_verdicts_series_and_worst_seconds():
    report = analyse_flashes(strobe(solid(0.0), solid(1.0), 3, 2 * FPS), FPS)
    data = json.loads(json.dumps(report.to_dict()))
    assert data["verdicts"]["wcag21"]["general"] == "fail" and data["passed"] is False
    assert (data["frames"], data["fps"], data["window_frames"]) == (2 * FPS, FPS, FPS)
    assert (data["width"], data["height"]) == report.size == (W, H)
    assert len(data["series"]["general"]["flashes"]) == 2 * FPS
    assert data["series"]["general"]["field_fraction"][-1] == 1.0
    assert data["worst_seconds"][0]["kind"] == "general"


def test_analysis_streams_a_generator_without_keeping_frames():
    # Memory stays flat in clip length: a frame is freed once the next one has been read.
    alive = []

    def frames():
        for i in range(3 * FPS):
            frame = solid(float((i // 3) % 2))
            alive.append(weakref.ref(frame))
            if len(alive) >= 3:  # CPython frees by reference count, at once
                assert alive[-3]() is None, "the analysis kept a reference to an old frame"
            yield frame
            del frame

    report = analyse_flashes(frames(), FPS)
    assert report.frames == 3 * FPS and report.verdicts["wcag21"]["general"] == "fail"


@pytest.mark.parametrize("frames,fps,message", [
    ([], FPS, "no frames"),
    ([np.zeros((H, W), np.float32)], FPS, "shape"),
    ([np.zeros((H, W, 4), np.float32)], FPS, "shape"),
    ([np.zeros((H, W, 3), np.uint8)], FPS, "dtype"),
    ([solid(0.0), solid(0.0, size=(W // 2, H))], FPS, "frame 1: size 120x180 differs"),
    ([solid(0.0)], 0, "fps"),
    ([solid(0.0)], -25, "fps"),
    ([solid(0.0)], float("nan"), "fps"),
    ([solid(0.0)], "25", "fps"),
])
def test_bad_input_raises_value_error_naming_the_problem(frames, fps, message):
    with pytest.raises(ValueError, match=message):
        analyse_flashes(frames, fps)


# --- the timeline plot -----------------------------------------------------------------------


def test_timeline_plot_writes_one_png_panel_per_label_atomically(tmp_path):
    render = analyse_flashes(strobe(solid(0.0), solid(1.0), 3, 2 * FPS), FPS)
    source = analyse_flashes(strobe(solid(0.2), solid(0.3), 6, 3 * FPS), FPS)
    one, two = tmp_path / "one.png", tmp_path / "out" / "two.png"
    plot_flash_timeline({"render": render}, one)
    plot_flash_timeline({"render": render, "source": source}, two)
    small, tall = cv2.imread(str(one)), cv2.imread(str(two))
    assert small is not None and tall is not None
    assert tall.shape[0] == 2 * small.shape[0] and tall.shape[1] == small.shape[1]
    assert sorted(p.name for p in tmp_path.rglob("*")) == ["one.png", "out", "two.png"]  # no temp files


def test_timeline_plot_needs_a_report(tmp_path):
    with pytest.raises(ValueError, match="no flash reports"):
        plot_flash_timeline({}, tmp_path / "empty.png")
    assert not (tmp_path / "empty.png").exists()
