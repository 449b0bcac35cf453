"""Tests for framestyle.finish.colour against published standards and reference libraries."""

import cv2
import numpy as np
import pytest
from skimage.exposure import match_histograms as skimage_match_histograms

from framestyle.finish.colour import (
    LUMA_BT601,
    LUMA_BT709,
    linear_to_srgb,
    luma,
    luminance_transfer,
    match_histograms,
    rgb_to_ycbcr,
    srgb_to_linear,
    ycbcr_to_rgb,
)


def _random_rgb(seed, h=17, w=23):
    return np.random.default_rng(seed).random((h, w, 3), dtype=np.float32)


def test_luma_weights_are_the_itu_values():
    # ITU-R BT.601 (Kr, Kg, Kb) = (0.299, 0.587, 0.114); ITU-R BT.709 = (0.2126, 0.7152, 0.0722).
    assert LUMA_BT601 == (0.299, 0.587, 0.114)
    assert LUMA_BT709 == (0.2126, 0.7152, 0.0722)
    for weights in (LUMA_BT601, LUMA_BT709):
        assert sum(weights) == pytest.approx(1.0, abs=1e-12)  # white has luma 1 (both standards)


@pytest.mark.parametrize("standard,weights", [("bt601", LUMA_BT601), ("bt709", LUMA_BT709)])
def test_luma_of_primaries_equals_their_weight(standard, weights):
    primaries = np.eye(3, dtype=np.float32).reshape(1, 3, 3)  # red, green, blue pixels
    np.testing.assert_allclose(luma(primaries, standard)[0], weights, atol=1e-7)


def test_bt601_ycbcr_matches_the_jfif_full_range_equations():
    # ITU-T T.871 (JPEG File Interchange Format), full-range BT.601 conversion, coefficients
    # quoted from memory to 6 decimals:
    #   Cb = -0.168736 R - 0.331264 G + 0.5 B + 0.5
    #   Cr =  0.5 R - 0.418688 G - 0.081312 B + 0.5
    rgb = _random_rgb(0)
    r, g, b = rgb[..., 0], rgb[..., 1], rgb[..., 2]
    ycc = rgb_to_ycbcr(rgb, "bt601")
    np.testing.assert_allclose(ycc[..., 0], 0.299 * r + 0.587 * g + 0.114 * b, atol=1e-6)
    np.testing.assert_allclose(ycc[..., 1], -0.168736 * r - 0.331264 * g + 0.5 * b + 0.5, atol=2e-6)
    np.testing.assert_allclose(ycc[..., 2], 0.5 * r - 0.418688 * g - 0.081312 * b + 0.5, atol=2e-6)
    # ITU-T T.871 inverse (from memory): R = Y + 1.402 Cr', B = Y + 1.772 Cb', primes = minus 0.5.
    back = ycbcr_to_rgb(ycc, "bt601")
    cb, cr = ycc[..., 1] - 0.5, ycc[..., 2] - 0.5
    np.testing.assert_allclose(back[..., 0], ycc[..., 0] + 1.402 * cr, atol=1e-5)
    np.testing.assert_allclose(back[..., 2], ycc[..., 0] + 1.772 * cb, atol=1e-5)


def test_bt709_ycbcr_inverse_uses_the_bt709_coefficients():
    # BT.709 full-range inverse (derived from Kr = 0.2126, Kb = 0.0722; values from memory):
    #   R = Y + 1.5748 Cr',  G = Y - 0.1873 Cb' - 0.4681 Cr',  B = Y + 1.8556 Cb'
    ycc = np.array([[[0.6, 0.3, 0.7], [0.4, 0.55, 0.45]]], np.float32)
    rgb = ycbcr_to_rgb(ycc, "bt709")
    y, cb, cr = ycc[..., 0], ycc[..., 1] - 0.5, ycc[..., 2] - 0.5
    np.testing.assert_allclose(rgb[..., 0], y + 1.5748 * cr, atol=1e-4)
    np.testing.assert_allclose(rgb[..., 1], y - 0.1873 * cb - 0.4681 * cr, atol=1e-4)
    np.testing.assert_allclose(rgb[..., 2], y + 1.8556 * cb, atol=1e-4)


@pytest.mark.parametrize("standard", ["bt601", "bt709"])
def test_ycbcr_round_trip_is_exact_to_float32(standard):
    rgb = _random_rgb(1)
    np.testing.assert_allclose(ycbcr_to_rgb(rgb_to_ycbcr(rgb, standard), standard), rgb, atol=1e-6)
    ycc = _random_rgb(2)  # any YCbCr triple, including out-of-gamut ones, round-trips
    np.testing.assert_allclose(rgb_to_ycbcr(ycbcr_to_rgb(ycc, standard), standard), ycc, atol=1e-6)


def test_ycbcr_agrees_with_opencv_ycrcb_for_float_input():
    # OpenCV cvtColor COLOR_RGB2YCrCb: BT.601 luma, channel order (Y, Cr, Cb), chroma offset
    # 0.5 for float images. OpenCV rounds the chroma scales to 0.713 and 0.564 (exact values
    # 0.71327 and 0.56433), so agreement is within |R-Y| * 2.7e-4 and |B-Y| * 3.3e-4 < 5e-4.
    rgb = _random_rgb(3)
    ours = rgb_to_ycbcr(rgb, "bt601")
    ocv = cv2.cvtColor(rgb, cv2.COLOR_RGB2YCrCb)
    np.testing.assert_allclose(ours[..., 0], ocv[..., 0], atol=1e-6)
    np.testing.assert_allclose(ours[..., 1], ocv[..., 2], atol=5e-4)
    np.testing.assert_allclose(ours[..., 2], ocv[..., 1], atol=5e-4)
    back = cv2.cvtColor(np.ascontiguousarray(ours[..., [0, 2, 1]]), cv2.COLOR_YCrCb2RGB)
    np.testing.assert_allclose(ycbcr_to_rgb(ours, "bt601"), back, atol=1e-3)


def test_luminance_transfer_keeps_content_chroma_and_stylised_luma():
    # Gatys et al. 2017, luminance-only transfer: Y from the stylised image, CbCr from the content.
    # Mid-range inputs keep the result inside the RGB cube, so nothing is clipped.
    content = 0.3 + 0.4 * _random_rgb(4)
    stylised = 0.3 + 0.4 * _random_rgb(5)
    out = luminance_transfer(stylised, content)
    assert out.shape == content.shape and out.dtype == np.float32
    assert out.min() > 0.0 and out.max() < 1.0
    np.testing.assert_allclose(
        rgb_to_ycbcr(out)[..., 1:], rgb_to_ycbcr(content)[..., 1:], atol=1e-6
    )
    np.testing.assert_allclose(luma(out), luma(stylised), atol=1e-6)


def test_luminance_transfer_clips_out_of_gamut_results():
    content = np.zeros((4, 4, 3), np.float32)
    content[..., 0] = 1.0  # saturated red: with luma 1 from white, R would exceed 1
    out = luminance_transfer(np.ones_like(content), content, "bt709")
    assert out.min() >= 0.0 and out.max() == 1.0


def test_luminance_transfer_rejects_mismatched_shapes():
    with pytest.raises(ValueError, match="shape"):
        luminance_transfer(_random_rgb(0, 8, 8), _random_rgb(1, 8, 9))


@pytest.mark.parametrize("levels", [None, 32])
def test_match_histograms_agrees_with_scikit_image(levels):
    # scikit-image exposure.match_histograms(channel_axis=-1) is the reference implementation
    # of per-channel CDF matching. Tolerance 1e-6: both interpolate the same quantiles in float.
    source = _random_rgb(6, 40, 30) ** 2
    reference = _random_rgb(7, 25, 50) ** 0.5
    if levels is not None:  # many repeated values exercise the unique-value/count bookkeeping
        source = np.round(source * levels) / levels
        reference = np.round(reference * levels) / levels
    ours = match_histograms(source, reference)
    ref = skimage_match_histograms(source, reference, channel_axis=-1)
    assert ours.shape == source.shape and ours.dtype == np.float32
    np.testing.assert_allclose(ours, ref, atol=1e-6)


def test_match_histograms_reproduces_reference_distribution_exactly_for_equal_sizes():
    # Histogram specification (Gonzalez & Woods): with equal pixel counts and distinct values,
    # the matched image is a rearrangement of the reference and keeps the source's pixel order.
    source = _random_rgb(8, 12, 12)
    reference = _random_rgb(9, 16, 9) * 0.5 + 0.25
    out = match_histograms(source, reference)
    for c in range(3):
        np.testing.assert_array_equal(
            np.sort(out[..., c].ravel()), np.sort(reference[..., c].ravel())
        )
        order = np.argsort(source[..., c].ravel())
        assert np.all(np.diff(out[..., c].ravel()[order]) >= 0)


def test_srgb_transfer_reference_points():
    # IEC 61966-2-1: the linear segment and the power law meet at 0.04045 (encoded) /
    # 0.0031308 (linear); 0 and 1 are fixed points.
    assert srgb_to_linear(0.0) == 0.0
    assert srgb_to_linear(1.0) == pytest.approx(1.0, abs=1e-7)
    assert linear_to_srgb(1.0) == pytest.approx(1.0, abs=1e-7)
    assert srgb_to_linear(0.04045) == pytest.approx(0.0031308, abs=1e-7)
    assert linear_to_srgb(0.0031308) == pytest.approx(0.04045, abs=1e-6)
    assert srgb_to_linear(0.02) == pytest.approx(0.02 / 12.92, rel=1e-6)
    # 0.5 encoded is about 0.2140 linear (value from memory; commonly quoted as 21.4 % grey).
    assert srgb_to_linear(0.5) == pytest.approx(0.2140, abs=1e-4)


def test_srgb_curve_is_continuous_at_the_break_point():
    below, above = srgb_to_linear(np.array([0.04045 - 1e-7, 0.04045 + 1e-7]))
    assert abs(above - below) < 1e-7


def test_srgb_round_trip_error_is_below_1e6_including_over_range_and_negative():
    x = np.linspace(-0.5, 4.0, 100_001, dtype=np.float32)
    np.testing.assert_allclose(linear_to_srgb(srgb_to_linear(x)), x, atol=1e-6, rtol=1e-6)
    np.testing.assert_allclose(srgb_to_linear(linear_to_srgb(x)), x, atol=1e-6, rtol=1e-6)


def test_srgb_over_range_extends_the_power_law_and_negatives_mirror():
    assert srgb_to_linear(2.0) == pytest.approx(((2.0 + 0.055) / 1.055) ** 2.4, rel=1e-6)
    assert np.all(np.diff(srgb_to_linear(np.linspace(0.0, 3.0, 1000))) > 0)
    x = np.array([0.01, 0.3, 1.7])
    np.testing.assert_array_equal(srgb_to_linear(-x), -srgb_to_linear(x))
    np.testing.assert_array_equal(linear_to_srgb(-x), -linear_to_srgb(x))


@pytest.mark.parametrize(
    "bad", [np.zeros((4, 4)), np.zeros((4, 4, 4)), np.zeros((4, 4, 3), np.uint8)]
)
def test_colour_functions_reject_non_rgb_float_input(bad):
    with pytest.raises(ValueError):
        rgb_to_ycbcr(bad)
    with pytest.raises(ValueError):
        match_histograms(bad, np.zeros((4, 4, 3)))


def test_unknown_luma_standard_is_rejected():
    with pytest.raises(ValueError, match="bt2020"):
        luma(_random_rgb(0), "bt2020")
