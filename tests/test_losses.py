"""Loss terms against numpy, worked examples and the papers' formulas."""

import numpy as np
import torch

from framestyle.style.losses import content_loss, gram_matrix, style_loss, temporal_loss, total_variation


def test_gram_matrix_matches_numpy_einsum():
    # Reference library: numpy.einsum computes G_ij = sum_k F_ik F_jk (Gatys et al. 2016, Eq. 3).
    f = np.random.default_rng(0).normal(size=(1, 5, 7, 3)).astype(np.float32)
    flat = f.reshape(1, 5, -1)
    expected = np.einsum("bik,bjk->bij", flat, flat) / (5 * 7 * 3)
    np.testing.assert_allclose(gram_matrix(torch.from_numpy(f)).numpy(), expected, rtol=1e-5)


def test_gram_matrix_gradient_matches_autograd_of_the_plain_product():
    # Reference: PyTorch autograd on the textbook expression F Fᵀ / (C·H·W).
    f = torch.rand(2, 4, 3, 5, dtype=torch.float64, requires_grad=True)
    weights = torch.rand(2, 4, 4, dtype=torch.float64)
    (gram_matrix(f) * weights).sum().backward()
    ours = f.grad.clone()
    f.grad = None
    flat = f.reshape(2, 4, 15)
    ((flat @ flat.transpose(1, 2) / 60) * weights).sum().backward()
    torch.testing.assert_close(ours, f.grad)


def test_gram_matrix_co_occurrence_worked_example():
    # Common practice (the classic teaching example of Gram matrices as feature co-occurrence):
    # a "diagonal" map [1,0,1,0] and a "green" map [0,0,1,1] fire together at one position,
    # so the unnormalised cross entry is 1; two maps that are 1 everywhere give 4.
    maps = torch.tensor([[1.0, 0, 1, 0], [0, 0, 1, 1]]).reshape(1, 2, 2, 2)
    unnormalised = gram_matrix(maps) * (2 * 2 * 2)  # undo the C·H·W normalisation
    assert unnormalised[0, 0, 1] == 1.0 and unnormalised[0, 1, 0] == 1.0
    ones = torch.ones(1, 2, 2, 2)
    assert (gram_matrix(ones) * 8)[0, 0, 1] == 4.0


def test_style_and_content_losses_are_zero_at_the_target_and_scale_free():
    f = torch.rand(1, 4, 6, 6)
    g = torch.rand(1, 4, 6, 6)
    assert float(style_loss(gram_matrix(f), gram_matrix(f))) == 0.0
    assert float(content_loss(f, f)) == 0.0
    # Relative losses: scaling the activations of a layer does not change them.
    assert abs(float(content_loss(10 * g, 10 * f)) - float(content_loss(g, f))) < 1e-5
    assert abs(float(style_loss(gram_matrix(10 * g), gram_matrix(10 * f)))
               - float(style_loss(gram_matrix(g), gram_matrix(f)))) < 1e-4


def test_total_variation_matches_numpy_differences():
    x = torch.rand(1, 3, 5, 6)
    a = x.numpy()
    expected = np.mean(np.diff(a, axis=2) ** 2) + np.mean(np.diff(a, axis=3) ** 2)
    assert abs(float(total_variation(x)) - expected) < 1e-6
    assert float(total_variation(torch.full((1, 3, 4, 4), 0.3))) == 0.0


def test_temporal_loss_is_zero_when_the_frame_equals_its_warped_predecessor():
    x = torch.rand(1, 3, 8, 8)
    assert float(temporal_loss(x, x.clone(), torch.ones(1, 1, 8, 8))) == 0.0


def test_temporal_loss_grows_with_the_masked_difference_only():
    # Ruder et al. 2016, Eq. 7: (1/D) Σ c (x − ω)²  with D = 3·H·W.
    warped = torch.zeros(1, 3, 4, 4)
    mask = torch.zeros(1, 1, 4, 4)
    mask[..., :2, :] = 1.0  # top half reliable, bottom half occluded
    x = warped.clone()
    x[..., 2:, :] = 5.0  # differences only where the mask is 0
    assert float(temporal_loss(x, warped, mask)) == 0.0
    x[..., 0, 0] = 2.0  # one reliable pixel differs by 2 in each of 3 channels
    assert abs(float(temporal_loss(x, warped, mask)) - 3 * 4.0 / (3 * 16)) < 1e-7
    x[..., 0, 1] = 2.0
    assert abs(float(temporal_loss(x, warped, mask)) - 2 * 3 * 4.0 / (3 * 16)) < 1e-7
