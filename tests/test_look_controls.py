"""Look controls a colourist expects: colour preservation, strength, mattes, look files,
coarse-to-fine, bit depth — each on a real render, and each surviving an interrupted render."""

import json
from pathlib import Path

import cv2
import numpy as np
import OpenImageIO as oiio
import pytest

from framestyle import io, store
from framestyle.finish.colour import rgb_to_ycbcr, srgb_to_linear
from framestyle.finish.compose import mix
from framestyle.errors import FramestyleError
from framestyle.pipeline import plan_render, preview, render
from framestyle.settings import Settings, load_look
from framestyle.working import deliver, prepare_frame

from conftest import SAMPLE, STYLE, fast_settings, kill_and_resume

INK = SAMPLE / "style_ink.png"


def _read(path: Path) -> np.ndarray:
    return cv2.imread(str(path), cv2.IMREAD_UNCHANGED)[..., ::-1]


def _take(clip: Path, out: Path, n: int) -> tuple[np.ndarray, np.ndarray]:
    name = f"take_{n:03d}.png"
    return _read(clip / name).astype(np.float32) / 255, _read(out / name).astype(np.float32) / 255


def test_strength_zero_gives_back_the_footage(small_clip, tmp_path):
    render(small_clip, tmp_path, fast_settings(strength=0.0), shots="2")
    for n in range(11, 21):
        src, out = _take(small_clip, tmp_path, n)
        assert np.array_equal(src, out)


def test_strength_mixes_linearly_between_footage_and_style():
    src = np.random.default_rng(0).random((8, 8, 3)).astype(np.float32)
    styled = np.random.default_rng(1).random((8, 8, 3)).astype(np.float32)
    half = mix(src, styled, strength=0.5)
    np.testing.assert_allclose(half, (src + styled) / 2, atol=1e-6)


def test_luma_mode_keeps_the_footages_chroma(small_clip, tmp_path):
    # Gatys et al. 2017, luminance-only transfer: the output's chroma is the content frame's;
    # chroma per ITU-R BT.709 full-range Y'CbCr. Pixels pushed out of gamut are clipped, so
    # we require the bulk of pixels to agree within 8-bit quantisation.
    render(small_clip, tmp_path, fast_settings(colour="luma", luma_standard="bt709"), shots="2")
    src, out = _take(small_clip, tmp_path, 12)
    diff = np.abs(rgb_to_ycbcr(src, "bt709")[..., 1:] - rgb_to_ycbcr(out, "bt709")[..., 1:])
    assert np.mean(diff <= 1.5 / 255) > 0.95
    assert np.abs(rgb_to_ycbcr(src, "bt709")[..., 0] - rgb_to_ycbcr(out, "bt709")[..., 0]).mean() > 0.02


def test_match_mode_brings_the_palette_towards_the_footage(small_clip, tmp_path):
    # Gatys et al. 2017, colour histogram matching of the style image to the content.
    render(small_clip, tmp_path / "style", fast_settings(), shots="2")
    render(small_clip, tmp_path / "match", fast_settings(colour="match"), shots="2")
    src, styled = _take(small_clip, tmp_path / "style", 15)
    _, matched = _take(small_clip, tmp_path / "match", 15)
    def gap(img):
        return np.abs(img.reshape(-1, 3).mean(0) - src.reshape(-1, 3).mean(0)).sum()
    assert gap(matched) < gap(styled)


def test_a_matte_limits_where_the_style_applies(small_clip, tmp_path):
    mattes = tmp_path / "mattes"
    mattes.mkdir()
    matte = np.zeros((72, 128), np.uint8)
    matte[:, 64:] = 255  # stylise the right half only
    for n in range(1, 21):
        cv2.imwrite(str(mattes / f"m_{n:03d}.png"), matte)
    out = tmp_path / "out"
    render(small_clip, out, fast_settings(matte=str(mattes), matte_softness=0.0), shots="2")
    src, styled = _take(small_clip, out, 14)
    assert np.array_equal(src[:, :64], styled[:, :64])
    assert np.abs(src[:, 64:] - styled[:, 64:]).mean() > 0.03


def test_a_matte_frame_with_alpha_counts_as_it_shows_over_black(small_clip, tmp_path):
    # white everywhere, the matte in the alpha (as a compositor exports one); and a grey-level
    # matte on opaque frames (tools that always write RGBA)
    from framestyle.finish.matte import Mattes

    alpha = np.zeros((72, 128), np.uint8)
    alpha[:, 64:] = 255
    for name, bgra in (("in_alpha", np.dstack([np.full((72, 128, 3), 255, np.uint8), alpha])),
                       ("opaque", np.dstack([np.repeat(alpha[..., None], 3, axis=2), np.full((72, 128), 255, np.uint8)]))):
        (tmp_path / name).mkdir()
        for n in range(1, 21):
            cv2.imwrite(str(tmp_path / name / f"m_{n:03d}.png"), bgra)
        matte = Mattes(io.open_source(small_clip), str(tmp_path / name))(3, softness=0.0)
        np.testing.assert_array_equal(matte, alpha / np.float32(255))


def test_mattes_that_do_not_match_the_input_are_refused(small_clip, tmp_path):
    mattes = tmp_path / "mattes"
    mattes.mkdir()
    cv2.imwrite(str(mattes / "m_001.png"), np.zeros((72, 128), np.uint8))
    with pytest.raises(FramestyleError, match="mattes must match"):
        render(small_clip, tmp_path / "out", fast_settings(matte=str(mattes)))
    assert not (tmp_path / "out").exists()


def test_sixteen_bit_frames_stay_sixteen_bit(tmp_path):
    clip = tmp_path / "deep"
    clip.mkdir()
    ramp = np.linspace(0, 65535, 128 * 72 * 3).reshape(72, 128, 3).astype(np.uint16)
    for n in range(1, 4):
        cv2.imwrite(str(clip / f"ramp_{n:03d}.png"), np.roll(ramp, n, axis=1))
    render(clip, tmp_path / "out", fast_settings(iterations=3))
    out = cv2.imread(str(tmp_path / "out" / "ramp_002.png"), cv2.IMREAD_UNCHANGED)
    assert out.dtype == np.uint16
    assert len(np.unique(out)) > 256  # more levels than 8 bits could hold


def test_exr_in_gives_exr_out_in_linear_light(tmp_path):
    # EXR is linear light; the network sees sRGB (IEC 61966-2-1), clipped to [0, 1]. With strength
    # 0 the delivered frames are the input within half precision, highlights above 1 and negative
    # values included; a renderer's NaN sample reads as 0 and an infinite one as half's largest
    # finite value, 65504 (IEEE 754 binary16), instead of stopping the render.
    clip = tmp_path / "exr"
    clip.mkdir()
    rng = np.random.default_rng(3)
    base = cv2.resize(rng.random((9, 16, 3)).astype(np.float32), (128, 72), interpolation=cv2.INTER_CUBIC)
    for n in range(1, 4):
        plate = np.clip(np.roll(base, n, axis=1), 0, 1) ** 2.2 * 4.0 - 0.5  # -0.5 .. 3.5
        if n == 2:
            plate[3, 5], plate[4, 6, 1] = np.nan, np.inf
        # written with OpenImageIO itself: framestyle writes no NaN
        out = oiio.ImageOutput.create(str(clip / f"plate_{n:03d}.exr"))
        assert out.open(str(clip / f"plate_{n:03d}.exr"), oiio.ImageSpec(128, 72, 3, oiio.FLOAT))
        assert out.write_image(np.ascontiguousarray(plate)) and out.close()
    render(clip, tmp_path / "out", fast_settings(iterations=3, strength=0.0))
    source = io.open_source(clip)
    result = io.open_source(tmp_path / "out")
    assert result.count == 3 and result.files[0].endswith(".exr")
    for index in range(3):
        expected = io.read_frame(source, index)
        assert expected.min() < -0.4 and expected.max() > 3.0
        np.testing.assert_allclose(io.read_frame(result, index), expected, rtol=1e-3, atol=1e-3)
    cleaned = io.read_frame(source, 1)
    assert np.array_equal(cleaned[3, 5], [0, 0, 0]) and cleaned[4, 6, 1] == 65504.0


def test_a_look_file_sets_everything_and_per_shot_looks(small_clip, tmp_path):
    look = tmp_path / "grade.toml"
    (tmp_path / "paint.png").write_bytes(STYLE.read_bytes())
    look.write_text('styles = ["paint.png"]\nwidth = 128\niterations = 6\nlong_term = [1, 4]\n'
                    '[shots.2]\nstrength = 0.0\n')
    values = load_look(look)
    assert values["styles"] == [str((tmp_path / "paint.png").resolve())]
    out = tmp_path / "out"
    render(small_clip, out, Settings.from_dict(values))
    src1, out1 = _take(small_clip, out, 3)
    src2, out2 = _take(small_clip, out, 14)
    assert np.abs(src1 - out1).mean() > 0.03  # shot 1: full style
    assert np.array_equal(src2, out2)  # shot 2: strength 0 from its own look
    saved = json.loads((out / store.MANIFEST).read_text())["settings"]
    assert saved["shot_looks"] == {"2": {"strength": 0.0}}


def test_a_shot_look_for_a_shot_the_clip_does_not_have_is_said(small_clip, tmp_path):
    events = []
    settings = fast_settings(shot_looks={"2": {"strength": 0.5}, "5": {"strength": 0.0}})
    plan_render(small_clip, tmp_path / "out", settings, progress=lambda e, **i: events.append((e, i)))
    warnings = [i["message"] for e, i in events if e == "warning"]
    assert warnings == ["the look's settings for shot(s) 5 apply to no shot: the clip has 2"]
    events.clear()  # a preview says so too
    preview(small_clip, tmp_path / "p", settings, 20, shots="1", progress=lambda e, **i: events.append((e, i)))
    assert "the look's settings for shot(s) 5 apply to no shot: the clip has 2" in [
        i["message"] for e, i in events if e == "warning"]


def test_a_look_file_may_not_set_the_settings_own_shot_looks(tmp_path):
    look = tmp_path / "look.toml"
    look.write_text('shot_looks = {}\n')
    with pytest.raises(FramestyleError, match=r"look.toml: shot_looks: unknown setting; .* \[shots.N\] table"):
        load_look(look)


def test_a_bad_look_file_names_the_file_and_the_problem(tmp_path):
    look = tmp_path / "bad.toml"
    look.write_text('strength = 2.0\n')
    with pytest.raises(FramestyleError, match="bad.toml: strength: expected less than or equal to 1"):
        load_look(look)
    look.write_text('warm_tv_weight = -1.0\n')
    with pytest.raises(FramestyleError, match="bad.toml: warm_tv_weight: expected greater than or equal to 0"):
        load_look(look)
    look.write_text('[shots.2]\nsparkle = 1\n')
    with pytest.raises(FramestyleError, match="sparkle"):
        load_look(look)


def test_a_look_file_saved_with_a_byte_order_mark_reads(tmp_path):
    # some editors save UTF-8 with a BOM, which TOML 1.0 does not allow (tomllib: "Invalid statement")
    look = tmp_path / "look.toml"
    look.write_text('strength = 0.5\n', encoding="utf-8-sig")
    assert load_look(look)["strength"] == 0.5


def test_coarse_to_fine_solves_a_coarse_level_first_on_a_shots_first_frame(tmp_path):
    # Gatys et al. 2017: optimise at half size, upsample, refine. Warm-started frames already
    # start from the warped previous frame, so only a shot's first frame uses both levels.
    clip = tmp_path / "big"
    clip.mkdir()
    for n in (1, 2):
        image = cv2.imread(str(SAMPLE / "frames" / f"drift_{n:04d}.png"))
        cv2.imwrite(str(clip / f"big_{n}.png"), cv2.resize(image, (256, 144), interpolation=cv2.INTER_AREA))
    render(clip, tmp_path / "out", fast_settings(width=256, levels=2, iterations=4, tolerance=0.0))
    done = store.Store(tmp_path / "out").finished()
    assert done["big_1.png"]["iterations"] == 8  # 4 at 128×72, then 4 at 256×144
    assert done["big_2.png"]["iterations"] == 4


def test_every_control_survives_sigkill_and_resume(small_clip, tmp_path):
    mattes = tmp_path / "mattes"
    mattes.mkdir()
    for n in range(1, 21):
        matte = np.zeros((72, 128), np.uint8)
        cv2.circle(matte, (40 + 3 * n, 36), 30, 255, -1)  # a matte that follows the frames
        cv2.imwrite(str(mattes / f"m_{n:03d}.png"), matte)
    look = tmp_path / "look.toml"
    look.write_text(
        f'styles = ["{STYLE}", "{INK}"]\nstyle_mix = [0.7, 0.3]\ncolour = "luma"\nstrength = 0.8\n'
        f'matte = "{mattes}"\nlevels = 2\nstroke_size = 1.5\nwidth = 128\niterations = 25\n'
        f'tolerance = 0.0\nlong_term = [1, 4]\ndetail_probe = 3\n[shots.1]\ncolour = "match"\n'
    )
    kill_and_resume(small_clip, tmp_path, ["--look", str(look), "--shots", "1"])


def test_the_alpha_passes_through_straight_or_associated():
    painted = np.full((2, 3, 3), 0.8, np.float32)  # the solver's result, display-referred
    alpha = np.array([[0.0, 0.5, 1.0], [1.0, 0.25, 0.0]], np.float32)
    footage = np.full((2, 3, 3), 0.3, np.float32)
    # straight alpha (PNG, TIFF): the colour as painted, the paint kept where the alpha hides it
    straight = deliver(painted, prepare_frame(footage, (3, 2), Settings(), linear=False), Settings(), None,
                       False, alpha)
    assert straight.shape == (2, 3, 4) and np.allclose(straight[..., :3], 0.8) and np.array_equal(straight[..., 3], alpha)
    # associated (OpenEXR's convention, Kainz, Bogart et al., from memory): colour = straight colour × alpha,
    # so a fully transparent pixel carries no paint and adds none in an "over" (Porter & Duff 1984:
    # out = A + (1 - αA) B)
    full = deliver(painted, prepare_frame(footage, (3, 2), Settings(), linear=True), Settings(), None, True, alpha)
    np.testing.assert_allclose(full[..., :3], np.broadcast_to(srgb_to_linear(0.8) * alpha[..., None], (2, 3, 3)), rtol=1e-6)
    background = np.full((2, 3, 3), 0.1, np.float32)
    over = full[..., :3] + (1 - alpha[..., None]) * background
    np.testing.assert_allclose(over[0, 0], background[0, 0])  # transparent: the background alone
    np.testing.assert_allclose(over[0, 2], srgb_to_linear(0.8) * np.ones(3), rtol=1e-6)  # opaque: the frame alone


def test_unstyled_float_samples_come_back_as_the_file_stored_them():
    # Where the style does not apply (strength 0, a black matte) a float frame's samples are the
    # file's own: highlights above 1, negatives and colour where the alpha is 0 (a glow, which an
    # "over" adds: Porter & Duff 1984), none of which the network's [0, 1] view can hold.
    stored = np.array([[[3.5, 1.2, 0.9], [-0.2, 0.1, 0.4], [0.3, 0.3, 0.3]]], np.float32)  # associated
    alpha = np.array([[1.0, 0.5, 0.0]], np.float32)
    read = stored / np.where(alpha > 0, alpha, 1)[..., None]  # straight, as io reads it
    painted = np.full((1, 3, 3), 0.6, np.float32)
    for settings, matte in ((Settings(strength=0.0), None), (Settings(), np.zeros((1, 3), np.float32))):
        for a, expected in ((alpha, stored), (None, read)):
            frame = prepare_frame(read, (3, 1), settings, linear=True)
            out = deliver(painted, frame, settings, matte, True, a)
            np.testing.assert_allclose(out[..., :3], expected, rtol=1e-6)
    half = deliver(painted, prepare_frame(read, (3, 1), Settings(), linear=True), Settings(strength=0.5), None, True)
    np.testing.assert_allclose(half, (read + srgb_to_linear(0.6)) / 2, rtol=1e-6)  # the mix is in linear light
