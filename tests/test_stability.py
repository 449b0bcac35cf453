"""Tests for framestyle.qc.stability: the flow warping error of Lai et al. (2018)."""

import math

import numpy as np
import pytest
from scipy import ndimage

from framestyle.motion import FlowPair
from framestyle.qc.stability import pair_warping_error, sequence_warping_error

H = W = 128


def _texture(shape, sigma, rng, low=0.1, high=0.9):
    """Gaussian-blurred white noise stretched to [low, high]: a smooth random texture."""
    t = ndimage.gaussian_filter(rng.normal(size=shape), sigma)
    return (low + (high - low) * (t - t.min()) / (t.max() - t.min())).astype(np.float32)


def _rgb(gray):
    return np.repeat(gray[..., None], 3, axis=2)


def _stylise(src):
    """A fixed per-pixel colour mapping standing in for a perfectly stable stylisation."""
    return np.stack([1.0 - src[..., 0], 0.3 + 0.4 * src[..., 1], src[..., 2] ** 2], axis=-1).astype(np.float32)


def test_static_sequence_has_zero_warping_error():
    src = _rgb(_texture((H, W), 2.0, np.random.default_rng(0)))
    out = _stylise(src)
    assert sequence_warping_error([out] * 4, [src] * 4) == 0.0


@pytest.mark.parametrize("out_size", [(H, W), (H // 2, W // 2)])
def test_independent_output_noise_gives_twice_the_variance_per_channel(out_size):
    # Analytic: for independent n_t, n_{t+1} ~ N(0, sigma^2) per channel,
    # E|n_t - n_{t+1}|^2 = 3 * 2 sigma^2 over three channels (variance of a difference of
    # independent Gaussians). With a static source the flow is 0 and every pixel is reliable.
    rng = np.random.default_rng(1)
    src = _rgb(_texture((H, W), 2.0, rng))
    base = _rgb(_texture(out_size, 2.0, rng, low=0.3, high=0.7))
    sigma = 0.02  # 10 sigma from 0 and 1: clipping never happens
    outputs = [base + rng.normal(0.0, sigma, base.shape).astype(np.float32) for _ in range(5)]
    assert all(o.min() > 0 and o.max() < 1 for o in outputs)

    error = sequence_warping_error(outputs, [src] * 5)

    assert error == pytest.approx(3 * 2 * sigma**2, rel=0.03)


def _moving_sources(n, step, rng):
    """Crops of one large texture sliding right by `step` px per frame (camera pan)."""
    world = _texture((H, W + n * step), 2.0, rng)
    return [_rgb(world[:, (n - 1 - t) * step : (n - 1 - t) * step + W].copy()) for t in range(n)]


def test_stable_stylisation_of_a_pan_scores_near_zero_and_flicker_adds_its_energy():
    sources = _moving_sources(4, 3, np.random.default_rng(2))
    stable = [_stylise(s) for s in sources]
    stable_error = sequence_warping_error(stable, sources)
    assert stable_error < 1e-5

    # A uniform brightness offset alternating 0, delta, 0, ... adds delta^2 per channel per pair
    # (each pair differs by exactly delta in all three channels).
    delta = 0.05
    flicker = [np.clip(o + (delta if t % 2 else 0.0), 0, 1) for t, o in enumerate(stable)]
    assert all(o.max() < 1 for o in flicker)
    assert sequence_warping_error(flicker, sources) == pytest.approx(3 * delta**2 + stable_error, rel=0.02)


def test_pair_error_is_zero_when_no_pixel_is_reliable(monkeypatch):
    src = _rgb(_texture((H, W), 2.0, np.random.default_rng(3)))
    monkeypatch.setattr(FlowPair, "earlier_mask", lambda flows: np.zeros(flows.forward.shape[:2], np.float32))
    assert pair_warping_error(src, 1.0 - src, src, src) == 0.0


def test_shot_of_fewer_than_two_frames_has_undefined_error():
    src = _rgb(_texture((H, W), 2.0, np.random.default_rng(4)))
    assert math.isnan(sequence_warping_error([src], [src]))
    assert math.isnan(sequence_warping_error([], []))


def test_sequence_error_streams_from_generators_and_checks_lengths():
    src = _rgb(_texture((H, W), 2.0, np.random.default_rng(5)))
    assert sequence_warping_error((src for _ in range(3)), (src for _ in range(3))) == 0.0
    with pytest.raises(ValueError):
        sequence_warping_error([src] * 3, [src] * 2)
    with pytest.raises(ValueError):
        sequence_warping_error([src] * 2, [src] * 3)


def test_pair_error_rejects_mismatched_frames():
    src = np.full((H, W, 3), 0.5, np.float32)
    with pytest.raises(ValueError):
        pair_warping_error(src, src[:64], src, src)
    with pytest.raises(ValueError):
        pair_warping_error(src, src, src, src[:64])
    with pytest.raises(ValueError):
        pair_warping_error(src[..., 0], src[..., 0], src, src)
