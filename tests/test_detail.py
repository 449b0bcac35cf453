"""Stroke detail: the ratio of framestyle.qc.detail, and the render steering its warm frames toward it."""

import re

import cv2
import numpy as np
import pytest
from scipy import ndimage

from framestyle import pipeline, store
from framestyle.qc.detail import detail_frames, detail_ratio, laplacian_energy
from framestyle.shots import Shot
from framestyle.temporal import DETAIL_AIM, STEER_RANGE, steered_tv

from conftest import fast_settings


def test_laplacian_energy_matches_scipys_laplace_with_the_same_border():
    # Reference library: scipy.ndimage.laplace sums the [1, -2, 1] second differences along
    # each axis, the 4-neighbour Laplacian; its "mirror" mode is OpenCV's BORDER_REFLECT_101.
    image = np.random.default_rng(0).random((40, 56, 3), dtype=np.float32)
    lap = np.stack([ndimage.laplace(image[..., c].astype(np.float64), mode="mirror") for c in range(3)], axis=-1)
    assert laplacian_energy(image) == pytest.approx(np.mean(lap**2), rel=1e-5)


def test_laplacian_energy_of_a_cosine_is_its_second_difference_eigenvalue_squared():
    # The second difference of cos(ωx) is (2 cos ω − 2) cos(ωx) (the eigenvalue of the discrete
    # Laplacian, a textbook fact; common practice). With ω = πk/(W − 1) the cosine is even about
    # both borders, so mirroring continues it exactly and the identity holds at every pixel.
    w, k, a = 65, 12, 0.3
    omega = np.pi * k / (w - 1)
    row = 0.5 + a * np.cos(omega * np.arange(w))
    image = np.repeat(np.tile(row, (16, 1))[..., None], 3, axis=2).astype(np.float32)
    expected = (a * (2 * np.cos(omega) - 2)) ** 2 * np.mean(np.cos(omega * np.arange(w)) ** 2)
    assert laplacian_energy(image) == pytest.approx(expected, rel=1e-4)


def test_detail_ratio_is_one_for_the_same_frame_and_falls_with_blur():
    image = np.random.default_rng(1).random((36, 64, 3), dtype=np.float32)
    assert detail_ratio(image, image) == 1.0
    soft = cv2.GaussianBlur(image, (0, 0), 1.0)
    assert 0 < detail_ratio(soft, image) < 0.2
    flat = np.full_like(image, 0.5)
    assert np.isnan(detail_ratio(image, flat))
    with pytest.raises(ValueError):
        detail_ratio(image, image[:10])


def test_detail_ratio_at_the_working_size_sees_through_the_delivery_of_an_upscaled_frame():
    # A frame solved at 64x36 and delivered 4x larger as 8-bit: brought back to the working
    # size, the ratio is close to the working frames' own; at the delivered size the upscaling
    # and the rounding noise weigh in.
    rng = np.random.default_rng(2)
    small = cv2.GaussianBlur(rng.random((36, 64, 3), dtype=np.float32), (0, 0), 1.0)
    small = (small - small.min()) / (small.max() - small.min())
    softer = cv2.GaussianBlur(small, (0, 0), 0.7)
    def delivered(x):
        return np.round(cv2.resize(x, (256, 144), interpolation=cv2.INTER_CUBIC).clip(0, 1) * 255) / 255
    at_work = detail_ratio(softer, small)
    assert detail_ratio(delivered(softer), delivered(small), (64, 36)) == pytest.approx(at_work, rel=0.1)
    assert detail_ratio(delivered(softer), delivered(small)) > 1.2 * at_work


def test_detail_frames_spread_over_the_shot_and_end_on_its_last_frame():
    assert detail_frames(Shot(1, 0, 131), 4) == [32, 65, 98, 131]  # its 33rd, 66th, 99th, 132nd frames
    assert detail_frames(Shot(2, 132, 141), 3) == [135, 138, 141]
    assert detail_frames(Shot(3, 5, 6), 3) == [5, 6]
    with pytest.raises(ValueError):
        detail_frames(Shot(1, 0, 9), 0)


def test_steered_tv_follows_its_formula_on_a_worked_example():
    # tv_t = clip(tv_{t-1} · (E_{t-1} / (a·E_ref))^γ, 0.25·base, 2·base): our own rule (no
    # paper), checked by hand: with a = 1 and γ = 0.5, 10 · (2 / 1)^0.5 = 14.142 and
    # 10 · 0.5^0.5 = 7.071; with γ = 1, 10 · 1.5 = 15 and 10 · 0.8 = 8; with the default
    # a = 1.05, 10 · 1 / 1.05 = 9.524 and 10 · 1.05 / 1.05 = 10.
    assert steered_tv(10.0, 2.0, 1.0, 10.0, gain=0.5, aim=1.0) == pytest.approx(14.1421, abs=1e-4)
    assert steered_tv(10.0, 0.5, 1.0, 10.0, gain=0.5, aim=1.0) == pytest.approx(7.0711, abs=1e-4)
    assert steered_tv(10.0, 1.5, 1.0, 10.0, aim=1.0) == pytest.approx(15.0)
    assert steered_tv(10.0, 0.8, 1.0, 10.0, aim=1.0) == pytest.approx(8.0)
    assert steered_tv(10.0, 1.0, 1.0, 10.0, aim=1.0) == 10.0  # on target: unchanged
    assert DETAIL_AIM == 1.05
    assert steered_tv(10.0, 1.0, 1.0, 10.0) == pytest.approx(9.5238, abs=1e-4)  # as detailed as the probe: a little less TV
    assert steered_tv(10.0, 1.05, 1.0, 10.0) == 10.0  # on the aim: unchanged
    assert steered_tv(18.0, 4.0, 1.0, 10.0) == 20.0  # held at twice the base
    assert steered_tv(3.0, 0.01, 1.0, 10.0) == 2.5  # and at a quarter of it
    assert steered_tv(7.0, 0.0, 1.0, 10.0) == 7.0  # a flat frame: nothing to compare
    assert STEER_RANGE == (0.25, 2.0)


def _steer(out):
    return {name: entry.get("steer") for record in store.Store(out).records().values()
            for name, entry in record["frames"].items()}


def test_a_render_steers_its_warm_frames_tv_weight_toward_the_detail_of_frames_solved_alone(small_clip, tmp_path):
    steered, fixed = tmp_path / "steered", tmp_path / "fixed"
    pipeline.render(small_clip, steered, fast_settings(detail_probe=4))
    pipeline.render(small_clip, fixed, fast_settings(detail_probe=0))
    steer = _steer(steered)
    names = sorted(steer)
    assert len(names) == 20 and all(v is None for v in _steer(fixed).values())
    for shot in (names[:10], names[10:]):  # shot 1: frames 0-9, shot 2: frames 10-19
        tv, energy, reference = steer[shot[0]]
        assert tv == 10.0 and energy == reference > 0  # a shot's first frame is its own reference
        for k in range(1, 10):
            prev, (tv, energy, reference) = steer[shot[k - 1]], steer[shot[k]]
            if k % 4:  # the reference carries on between probes
                assert reference == prev[2]
            else:  # a probe: a new reference, from the frame solved on its own
                assert reference != prev[2]
            assert tv == steered_tv(prev[0], prev[1], reference, 10.0)
    log = (steered / store.LOG).read_text()
    assert re.findall(r"frame (\S+): detail probe", log) == [names[i] for i in (4, 8, 14, 18)]
    # frame 1's predecessor is the reference itself: one aim's worth less smoothing than the
    # fixed render, and from there on the frames differ from it
    def frame(folder, name):
        return cv2.imread(str(folder / name))
    assert steer[names[1]][0] == pytest.approx(10.0 / DETAIL_AIM)
    assert not np.array_equal(frame(steered, names[1]), frame(fixed, names[1]))
    assert steer[names[2]][0] != steer[names[1]][0]


def test_a_later_pass_steers_along_its_own_direction_toward_the_first_pass_references(small_clip, tmp_path):
    # pass 2 runs backward: each frame's weight comes from the frame after it, solved just
    # before it in that pass; the pass's first frame (the shot's last) from its own pass-1 entry
    out = tmp_path / "two_passes"
    pipeline.render(small_clip, out, fast_settings(detail_probe=4, passes=2, pass_iterations=2))
    first = _steer(out)
    pipeline.render(small_clip, tmp_path / "one_pass", fast_settings(detail_probe=4))
    one_pass = _steer(tmp_path / "one_pass")  # pass 1 of the two-pass render, frame for frame
    names = sorted(first)
    for shot in (names[:10], names[10:]):
        last = shot[-1]
        assert first[last][2] == one_pass[last][2]  # the reference of pass 1 is kept
        assert first[last][0] == steered_tv(one_pass[last][0], one_pass[last][1], one_pass[last][2], 10.0)
        for k in range(len(shot) - 2, -1, -1):
            (tv, energy, reference), after = first[shot[k]], first[shot[k + 1]]
            assert reference == one_pass[shot[k]][2]
            assert tv == steered_tv(after[0], after[1], reference, 10.0)
            assert energy != one_pass[shot[k]][1]  # the frame was solved again
