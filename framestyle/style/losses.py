"""Loss terms of video style transfer, as pure functions over tensors.

Content and Gram style losses follow Gatys, Ecker & Bethge 2016 ("Image Style Transfer Using
Convolutional Neural Networks"); the temporal loss follows Ruder, Dosovitskiy & Brox 2016
("Artistic style transfer for videos"). Content and style losses are *relative* (divided by
the squared norm of their target) so one style weight behaves alike across styles and layers
whose activations differ by orders of magnitude.

Example
-------
>>> f = torch.rand(1, 8, 4, 4)
>>> float(style_loss(gram_matrix(f), gram_matrix(f)))
0.0
"""

from __future__ import annotations

import torch


def gram_matrix(features: torch.Tensor) -> torch.Tensor:
    """Gram matrix of feature maps, normalised by channels × positions.

    G_ij = Σ_k F_ik F_jk / (C·H·W) (Gatys et al. 2016, Eq. 3, with the normalisation moved
    into G so matrices of different layers and sizes are comparable).

    Parameters
    ----------
    features : (B, C, H, W) tensor

    Returns
    -------
    (B, C, C) tensor
    """
    if features.dim() != 4:
        raise ValueError(f"features must be (B, C, H, W), got shape {tuple(features.shape)}")
    b, c, h, w = features.shape
    return _Gram.apply(features.reshape(b, c, h * w)) / (c * h * w)  # (B, C, C)


class _Gram(torch.autograd.Function):
    """G = F Fᵀ with a one-product backward: dF = (dG + dGᵀ) F.

    Autograd's own backward of ``F @ F.transpose`` multiplies twice by the large (C, H·W)
    operand and adds the two results; the Gram matrices are a large share of each solver
    iteration with a network as light as EfficientNet-Lite0.
    """

    @staticmethod
    def forward(ctx, flat: torch.Tensor) -> torch.Tensor:  # flat: (B, C, N)
        ctx.save_for_backward(flat)
        return flat @ flat.transpose(1, 2)

    @staticmethod
    def backward(ctx, grad: torch.Tensor) -> torch.Tensor:
        (flat,) = ctx.saved_tensors
        return (grad + grad.transpose(1, 2)) @ flat


def style_loss(gram: torch.Tensor, target: torch.Tensor) -> torch.Tensor:
    """Relative squared Gram error ‖G − A‖²_F / ‖A‖²_F (Gatys et al. 2016, Eq. 4, normalised).

    Parameters
    ----------
    gram, target : (B, C, C) tensors
    """
    return (gram - target).square().sum() / target.square().sum().clamp_min(1e-12)


def content_loss(features: torch.Tensor, target: torch.Tensor) -> torch.Tensor:
    """Relative squared feature error ‖F − P‖² / ‖P‖² (Gatys et al. 2016, Eq. 1, normalised).

    Parameters
    ----------
    features, target : (B, C, H, W) tensors of the same shape
    """
    return (features - target).square().sum() / target.square().sum().clamp_min(1e-12)


def total_variation(image: torch.Tensor) -> torch.Tensor:
    """Mean squared difference of neighbouring pixels (Mahendran & Vedaldi 2015, β = 2).

    Parameters
    ----------
    image : (B, C, H, W) tensor
    """
    return (image[..., 1:, :] - image[..., :-1, :]).square().mean() + (
        image[..., :, 1:] - image[..., :, :-1]
    ).square().mean()


def temporal_loss(image: torch.Tensor, warped: torch.Tensor, weight: torch.Tensor) -> torch.Tensor:
    """Short-term temporal loss (1/D) Σ c·(x − ω(x_prev))² (Ruder et al. 2016, Eq. 7).

    Parameters
    ----------
    image : (1, 3, H, W) tensor
        The frame being optimised, x.
    warped : (1, 3, H, W) tensor
        An earlier stylised frame warped into this frame, ω(x_prev).
    weight : (1, 1, H, W) tensor
        Per-pixel weights c in [0, 1] (reliability mask, or long-term weights).

    Returns
    -------
    Scalar tensor; D = 3·H·W is the number of values in the frame.
    """
    return (weight * (image - warped).square()).mean()  # mean over (1, 3, H, W): 1/D
