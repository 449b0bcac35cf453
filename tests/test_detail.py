"""Tests for framestyle.qc.detail: the stroke-detail ratio of a render."""

import cv2
import numpy as np
import pytest
from scipy import ndimage

from framestyle.qc.detail import detail_frames, detail_ratio, laplacian_energy
from framestyle.shots import Shot


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
