"""Tests for framestyle.motion: DIS flow, backward warping, reliability and long-term masks."""

import cv2
import numpy as np
import pytest
from scipy import ndimage

from framestyle.motion import (
    FLOW_PRESETS,
    WARP_FILTERS,
    _to_gray_u8,
    compute_flow,
    inside_mask,
    long_term_masks,
    reliability_mask,
    warp,
)

H = W = 128


def _analytic(x, y):
    """Smooth RGB test image (sinusoids of 20-40 px wavelength), values in [0.1, 0.9]."""
    return np.stack(
        [
            0.5 + 0.25 * np.sin(2 * np.pi * x / 37.0) + 0.15 * np.cos(2 * np.pi * y / 29.0),
            0.5 + 0.4 * np.sin(2 * np.pi * (x + y) / 41.0),
            0.5 + 0.2 * np.cos(2 * np.pi * x / 23.0) * np.sin(2 * np.pi * y / 31.0),
        ],
        axis=-1,
    ).astype(np.float32)


def _grid():
    return np.meshgrid(np.arange(W, dtype=np.float64), np.arange(H, dtype=np.float64))


def _texture(shape, sigma, rng):
    """Gaussian-blurred white noise stretched to [0.1, 0.9]: a smooth random texture."""
    t = ndimage.gaussian_filter(rng.normal(size=shape), sigma)
    return (0.1 + 0.8 * (t - t.min()) / (t.max() - t.min())).astype(np.float32)


def _rgb(gray):
    return np.repeat(gray[..., None], 3, axis=2)


def _flow_from_map(map_x, map_y):
    xs, ys = _grid()
    return np.stack([map_x - xs, map_y - ys], axis=-1).astype(np.float32)


def test_warp_by_constant_translation_matches_analytic_shift_and_warp_affine():
    xs, ys = _grid()
    image = _analytic(xs, ys)
    dx, dy = 3.3, -2.6
    flow = np.zeros((H, W, 2), np.float32)
    flow[..., 0], flow[..., 1] = dx, dy

    out = warp(image, flow)

    # Ground truth: out(p) = I(p + d), evaluated analytically with numpy. Bilinear error on
    # sinusoids of wavelength >= 23 px is below A (2 pi / lambda)^2 / 8 ~ 3e-3.
    truth = _analytic(xs + dx, ys + dy)
    interior = np.s_[4:-4, 4:-4]
    np.testing.assert_allclose(out[interior], truth[interior], atol=4e-3)
    # Reference library: OpenCV warpAffine with WARP_INVERSE_MAP samples src(M [x, y, 1]^T).
    m = np.float32([[1, 0, dx], [0, 1, dy]])
    ref = cv2.warpAffine(image, m, (W, H), flags=cv2.INTER_LINEAR | cv2.WARP_INVERSE_MAP,
                         borderMode=cv2.BORDER_REPLICATE)
    np.testing.assert_allclose(out, ref, atol=1e-4)


def test_warp_by_rotation_flow_matches_analytic_rotation_and_warp_affine():
    xs, ys = _grid()
    image = _analytic(xs, ys)
    theta, cx, cy = np.deg2rad(7.0), 63.5, 60.0
    c, s = np.cos(theta), np.sin(theta)
    map_x = c * (xs - cx) - s * (ys - cy) + cx
    map_y = s * (xs - cx) + c * (ys - cy) + cy

    out = warp(image, _flow_from_map(map_x, map_y))

    inside = (map_x > 2) & (map_x < W - 3) & (map_y > 2) & (map_y < H - 3)
    truth = _analytic(map_x, map_y)  # analytic rotation of the image about (cx, cy)
    np.testing.assert_allclose(out[inside], truth[inside], atol=4e-3)
    # Reference library: OpenCV warpAffine with the same inverse map. Both quantise positions to
    # 1/32 px; rounding the float32 flow may flip one step (<= 0.06/px gradient * 1/32 px).
    m = np.float32([[c, -s, cx - c * cx + s * cy], [s, c, cy - s * cx - c * cy]])
    ref = cv2.warpAffine(image, m, (W, H), flags=cv2.INTER_LINEAR | cv2.WARP_INVERSE_MAP,
                         borderMode=cv2.BORDER_REPLICATE)
    np.testing.assert_allclose(out[inside], ref[inside], atol=2e-3)


def _keys_cubic(t):
    """Keys (1981) cubic convolution kernel with a = -0.75, the value OpenCV's INTER_CUBIC uses
    (OpenCV imgproc's interpolateCubic; from memory)."""
    a, t = -0.75, np.abs(t)
    return np.where(t <= 1, (a + 2) * t**3 - (a + 3) * t**2 + 1,
                    np.where(t < 2, a * t**3 - 5 * a * t**2 + 8 * a * t - 4 * a, 0.0))


def _lanczos4(t):
    """Lanczos kernel with a = 4 (8 taps), sinc(t) sinc(t / 4) (Duchon 1979); OpenCV's
    INTER_LANCZOS4 normalises the 8 taps to sum to 1 (from memory)."""
    return np.where(np.abs(t) < 4, np.sinc(t) * np.sinc(t / 4), 0.0)


@pytest.mark.parametrize("name, flag, kernel, taps", [
    ("linear", cv2.INTER_LINEAR, lambda t: np.maximum(1 - np.abs(t), 0), 2),
    ("cubic", cv2.INTER_CUBIC, _keys_cubic, 4),
    ("lanczos", cv2.INTER_LANCZOS4, _lanczos4, 8),
])
def test_warp_filters_match_opencv_and_their_published_kernels_on_a_known_shift(name, flag, kernel, taps):
    rng = np.random.default_rng(7)
    image = rng.random((H, W, 3), dtype=np.float32)  # white noise: every frequency counts
    dx, dy = 2.25, -1.0  # 2.25 lies on OpenCV's 1/32-pixel interpolation grid: no rounding
    out = warp(image, _constant_flow(dx, dy), name)
    # Reference library: OpenCV's remap and warpAffine (inverse map) with the same interpolation.
    xs, ys = np.meshgrid(np.arange(W, dtype=np.float32), np.arange(H, dtype=np.float32))
    np.testing.assert_array_equal(out, cv2.remap(image, xs + dx, ys + dy, flag, borderMode=cv2.BORDER_REPLICATE))
    m = np.float32([[1, 0, dx], [0, 1, dy]])
    ref = cv2.warpAffine(image, m, (W, H), flags=flag | cv2.WARP_INVERSE_MAP, borderMode=cv2.BORDER_REPLICATE)
    np.testing.assert_allclose(out, ref, atol=1e-5)
    # The published kernel: out(x) = sum_k w(x + dx - k) I(k) over the taps around x + dx, the
    # weights normalised to sum to 1; the whole-pixel dy is an exact row shift.
    offsets = np.arange(-(taps // 2) + 1, taps // 2 + 1)  # taps at floor(x + dx) + offsets
    weights = kernel(0.25 - offsets)
    weights = weights / weights.sum()
    expected = sum(w * np.roll(image, (1, -(2 + int(o))), axis=(0, 1)) for w, o in zip(weights, offsets))
    interior = np.s_[2:-2, 8:-8]
    np.testing.assert_allclose(out[interior], expected[interior], atol=2e-5)


def test_sharper_warp_filters_keep_more_detail_through_a_chain_of_half_pixel_warps():
    # Why the render warps with more than bilinear: ten warps by half a pixel (there and back)
    # should give the image back; each filter loses some of the finest detail on the way.
    image = _rgb(_texture((H, W), 0.7, np.random.default_rng(8)))
    def energy(x):
        return float(np.mean(cv2.Laplacian(x[8:-8, 8:-8], cv2.CV_32F) ** 2))
    kept = {}
    for name in WARP_FILTERS:
        out = image
        for k in range(10):
            out = warp(out, _constant_flow(0.5 if k % 2 == 0 else -0.5, 0.0), name)
        kept[name] = energy(out) / energy(image)
    assert kept["linear"] < 0.5 < kept["cubic"] < kept["lanczos"] < 1.05


def test_warp_rejects_an_unknown_filter():
    with pytest.raises(ValueError, match="unknown warp filter"):
        warp(np.zeros((H, W, 3), np.float32), np.zeros((H, W, 2), np.float32), "nearest")


@pytest.mark.parametrize("shape", [(H, W), (H, W, 1), (H, W, 2), (H, W, 5)])
def test_warp_keeps_shape_and_zero_flow_is_identity(shape):
    image = np.random.default_rng(0).random(shape, dtype=np.float32)
    out = warp(image, np.zeros((H, W, 2), np.float32))
    assert out.shape == shape and out.dtype == np.float32
    np.testing.assert_array_equal(out, image)


def test_warp_rejects_flow_of_another_size():
    with pytest.raises(ValueError):
        warp(np.zeros((H, W, 3), np.float32), np.zeros((H, W + 1, 2), np.float32))


def test_dis_flow_recovers_known_subpixel_shift_of_smooth_texture():
    texture = _texture((H, W), 2.0, np.random.default_rng(0))
    dx, dy = 1.5, -0.75
    # scipy.ndimage.shift: out(q) = in(q - s), so src(p) = dst(p + s) and the flow is s = (dx, dy).
    shifted = ndimage.shift(texture, (dy, dx), order=3, mode="reflect")
    src, dst = _rgb(texture), _rgb(shifted)

    for preset in FLOW_PRESETS:
        flow = compute_flow(src, dst, preset)
        assert flow.shape == (H, W, 2) and flow.dtype == np.float32
        err = np.hypot(flow[..., 0] - dx, flow[..., 1] - dy)[16:-16, 16:-16]
        assert np.median(err) < 0.25, preset


def test_dis_flow_is_bit_identical_across_calls_objects_and_thread_counts():
    rng = np.random.default_rng(3)
    a = _rgb(_texture((H, W), 2.0, rng))
    b = _rgb(ndimage.shift(a[..., 0], (1.0, -2.0), order=1, mode="nearest"))
    other = _rgb(_texture((96, 80), 2.0, rng))

    first = compute_flow(a, b)
    compute_flow(other, other[::-1].copy())  # the cached DIS object meets another size between calls
    threads = cv2.getNumThreads()
    try:
        for n in (1, 2, 4):
            cv2.setNumThreads(n)
            np.testing.assert_array_equal(compute_flow(a, b), first)
    finally:
        cv2.setNumThreads(threads)
    fresh = cv2.DISOpticalFlow_create(cv2.DISOPTICAL_FLOW_PRESET_MEDIUM)
    np.testing.assert_array_equal(fresh.calc(_to_gray_u8(a), _to_gray_u8(b), None), first)


def test_compute_flow_rejects_bad_input():
    img = np.zeros((32, 32, 3), np.float32)
    with pytest.raises(ValueError):
        compute_flow(img, np.zeros((32, 33, 3), np.float32))
    with pytest.raises(ValueError):
        compute_flow(img, img, "slowest")
    with pytest.raises(ValueError):
        compute_flow(img[..., 0], img[..., 0])
    with pytest.raises(ValueError):
        compute_flow(img[:4, :4], img[:4, :4])  # smaller than one DIS patch


def _constant_flow(dx, dy):
    flow = np.empty((H, W, 2), np.float32)
    flow[..., 0], flow[..., 1] = dx, dy
    return flow


@pytest.mark.parametrize("dx, dy", [(3, -2), (-2, 4)])
def test_mask_of_consistent_translation_is_one_except_where_it_leaves_the_image(dx, dy):
    mask = reliability_mask(_constant_flow(dx, dy), _constant_flow(-dx, -dy))
    assert mask.shape == (H, W) and mask.dtype == np.float32
    # The image spans [-0.5, W - 0.5]: p + d leaves it on |d| whole columns/rows at one side.
    cols, rows = np.arange(W) + dx, np.arange(H) + dy
    expected = ((rows >= 0) & (rows <= H - 1))[:, None] & ((cols >= 0) & (cols <= W - 1))[None, :]
    assert expected.sum() == (H - abs(dy)) * (W - abs(dx))
    np.testing.assert_array_equal(mask, expected.astype(np.float32))


@pytest.mark.parametrize("dx, dy", [(3, -2), (-2.6, 0.4)])
def test_inside_mask_is_zero_exactly_where_the_flow_leaves_the_image(dx, dy):
    # Pixel p covers p ± 0.5 (common practice), so p + d is inside iff -0.5 <= p + d <= N - 0.5.
    cols, rows = np.arange(W) + dx, np.arange(H) + dy
    expected = ((rows >= -0.5) & (rows <= H - 0.5))[:, None] & ((cols >= -0.5) & (cols <= W - 0.5))[None, :]
    mask = inside_mask(_constant_flow(dx, dy))
    assert mask.dtype == np.float32
    np.testing.assert_array_equal(mask, expected.astype(np.float32))


@pytest.mark.parametrize("e, reliable", [(1.48, True), (1.5, False)])
def test_disocclusion_threshold_follows_ruder_formula(e, reliable):
    # Ruder et al. (2016), Sec. 3: disoccluded iff |w~ + w^|^2 > 0.01(|w~|^2 + |w^|^2) + 0.5.
    # w^ = (10, 0), w~ = (-10 + e, 0): the test reads 0.99 e^2 + 0.2 e - 2.5 > 0, true for
    # e = 1.5 (+0.0275) and false for e = 1.48 (-0.0355); the crossing is at e = 1.4913.
    mask = reliability_mask(_constant_flow(10.0, 0.0), _constant_flow(-10.0 + e, 0.0))
    assert np.all(mask[:, : W - 10] == float(reliable))


def test_motion_boundary_threshold_follows_ruder_formula():
    # Ruder et al. (2016), Sec. 3: boundary iff |grad u^|^2 + |grad v^|^2 > 0.01|w^|^2 + 0.002.
    # u^ = a*y, v^ = 0 gives |grad|^2 = a^2 (finite differences are exact on a ramp); the flow is
    # horizontal, so w~ = flow_fwd = -w^ on the same row and the disocclusion test never fires.
    a = 0.05
    ys = np.arange(H, dtype=np.float32)[:, None]
    back = np.zeros((H, W, 2), np.float32)
    back[..., 0] = a * ys
    mask = reliability_mask(back, -back)
    # a^2 = 0.0025 > 0.01 (a y)^2 + 0.002  <=>  y^2 < 20  <=>  rows 0..4 are boundary.
    inside = np.arange(W)[None, :] + a * ys <= W - 0.5
    expected = np.where(np.arange(H)[:, None] < 5, 0.0, 1.0) * inside
    np.testing.assert_array_equal(mask, expected)
    # A gentler ramp (a^2 = 0.0016 < 0.002) is no boundary anywhere.
    gentle = back * (0.04 / a)
    assert np.all(reliability_mask(gentle, -gentle)[:, : W - 6] == 1)


@pytest.mark.parametrize("seed", [0, 1, 2])
def test_mask_marks_disocclusion_behind_moving_square_and_little_else(seed):
    rng = np.random.default_rng(seed)
    background, square = _texture((H, W), 2.0, rng), _texture((32, 32), 2.0, rng)
    y0, x0, step = 48, 40, 6

    def frame(x):
        f = background.copy()
        f[y0 : y0 + 32, x : x + 32] = square
        return _rgb(f)

    prev, cur = frame(x0), frame(x0 + step)
    mask = reliability_mask(compute_flow(cur, prev), compute_flow(prev, cur))

    # Background uncovered in the current frame: visible now, hidden behind the square before.
    assert (mask[y0 : y0 + 32, x0 : x0 + step] == 0).mean() > 0.95
    # The square's own interior moved rigidly and stays reliable.
    assert np.all(mask[y0 + 8 : y0 + 24, x0 + step + 8 : x0 + step + 24] == 1)
    # Chebyshev distance of each pixel to the box covering both square positions.
    yy, xx = np.mgrid[:H, :W]
    dist_y = np.maximum(y0 - yy, yy - (y0 + 31))
    dist_x = np.maximum(x0 - xx, xx - (x0 + step + 31))
    dist = np.maximum(np.maximum(dist_y, dist_x), 0)
    # DIS spreads flow across a motion edge over about one patch (8 px for the medium preset,
    # OpenCV's getPatchSize()), so the motion-boundary band is a few px wide plus a little bleed.
    assert np.all(mask[dist > 12] == 1)
    assert (mask[dist > 4] == 0).mean() < 0.03


def test_long_term_masks_keep_each_pixel_for_its_most_recent_visible_frame():
    # Worked example of c_long^(j) = max(c^(j) - sum_{k<j} c^(k), 0), Ruder et al. (2016), Sec. 3.2.
    c1 = np.array([[1, 0, 0], [0, 0, 0.3]], np.float32)
    c2 = np.array([[1, 1, 0], [0, 0, 0.8]], np.float32)
    c3 = np.array([[1, 1, 1], [0, 1, 1.0]], np.float32)
    long1, long2, long3 = long_term_masks([c1, c2, c3])
    np.testing.assert_allclose(long1, c1)
    np.testing.assert_allclose(long2, [[0, 1, 0], [0, 0, 0.5]], atol=1e-6)
    np.testing.assert_allclose(long3, [[0, 0, 1], [0, 1, 0]], atol=1e-6)
    assert all(m.dtype == np.float32 for m in (long1, long2, long3))


def test_long_term_masks_handles_empty_and_rejects_mixed_shapes():
    assert long_term_masks([]) == []
    with pytest.raises(ValueError):
        long_term_masks([np.ones((2, 2)), np.ones((2, 3))])
