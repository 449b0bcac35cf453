"""The per-frame solver: optimise one frame's pixels against content, style and temporal losses.

Image optimisation by L-BFGS as in Gatys, Ecker & Bethge 2016 ("Image Style Transfer Using
Convolutional Neural Networks"), with the temporal terms and warm start of Ruder, Dosovitskiy &
Brox 2016 ("Artistic style transfer for videos"). The solver stops when the loss has
converged (relative decrease below a tolerance over a chunk of iterations) or at the
iteration cap, so warm-started frames naturally take fewer iterations than a shot's first.

Example
-------
>>> from framestyle.style.network import load_network
>>> net = load_network("efficientnet-lite0")
>>> style = style_targets(net, [torch.rand(1, 3, 96, 96)], [1.0], net.style_layers)
>>> frame = torch.rand(1, 3, 96, 96)
>>> out, stats = solve(net, Problem(frame, frame), style, SolverParams(iterations=20))
"""

from __future__ import annotations

import functools
import math
from dataclasses import dataclass, field, replace
from typing import Callable, Sequence

import torch

from framestyle.imaging import resize_tensor
from framestyle.style.lbfgs import LBFGS
from framestyle.style.losses import content_loss, gram_matrix, style_loss, temporal_loss, total_variation
from framestyle.style.network import FeatureNet

_CHUNK = 5  # iterations between convergence checks (the tolerance is stated per 10)
_HISTORY = 10  # L-BFGS curvature pairs kept


@dataclass(frozen=True)
class SolverParams:
    """Loss weights and stopping rule of one frame's optimisation (Gatys et al. 2016, Eq. 7;
    Ruder et al. 2016, Eq. 8)."""

    style_weight: float = 5.0  # weight of the relative Gram style loss
    content_weight: float = 1.0  # weight of the relative content loss
    tv_weight: float = 10.0  # total-variation weight: suppresses pixel-level speckle
    warm_tv_weight: float | None = None  # the same for frames with temporal terms (None: tv_weight)
    temporal_weight: float = 50.0  # weight of the short- and long-term temporal losses
    iterations: int = 300  # most L-BFGS iterations (at the coarsest level with several)
    warm_iterations: int | None = None  # the same for frames with temporal terms (None: iterations)
    tolerance: float = 0.01  # stop when the loss falls by less than this fraction per 10 iterations
    levels: int | None = None  # coarse-to-fine levels for frames without temporal terms (None: coarse_levels)
    warm_levels: int = 1  # coarse-to-fine levels for frames with temporal terms (warm-started)
    content_layer: str = ""  # empty: the network's default content layer
    image_scales: int = 3  # scales a frame without temporal terms is optimised over (1: its pixels)
    precision: str = "float32"  # the network's arithmetic: "float32" or "bfloat16" (autocast)


@dataclass
class Problem:
    """What one frame is optimised against.

    content : (1, 3, H, W) in [0, 1] — the source frame at working size.
    init : (1, 3, H, W) — the starting image (content + noise, or the warped previous frame).
    temporal : list of (warped (1, 3, H, W), weight (1, 1, H, W)) pairs, one per earlier
        frame the temporal loss ties this frame to (Ruder et al. 2016, Eqs. 7 and 9).
    """

    content: torch.Tensor
    init: torch.Tensor
    temporal: list[tuple[torch.Tensor, torch.Tensor]] = field(default_factory=list)


@dataclass
class SolveStats:
    """How a frame's optimisation went."""

    iterations: int
    style: float
    content: float
    temporal: float


def style_targets(
    net: FeatureNet, images: Sequence[torch.Tensor], mix: Sequence[float], layers: Sequence[str]
) -> dict[str, torch.Tensor]:
    """Target Gram matrices: the weighted mean of each style image's Gram matrices.

    Mixing at the Gram level blends several styles' textures rather than their pixels
    (Gatys et al. 2016, Sec. 3 on combining styles; Gatys et al. 2017, Sec. 5).

    Parameters
    ----------
    images : sequence of (1, 3, h, w) tensors in [0, 1]
    mix : weights, one per image (normalised here)
    layers : style layer names

    Returns
    -------
    dict layer -> (1, C, C) tensor
    """
    if len(images) != len(mix) or not images:
        raise ValueError("need one mix weight per style image, and at least one image")
    total = float(sum(mix))
    targets: dict[str, torch.Tensor] = {}
    device = net.device
    with torch.no_grad():
        for image, weight in zip(images, mix):
            feats = net(image.to(device), layers)
            for layer in layers:
                g = gram_matrix(feats[layer]) * (weight / total)
                targets[layer] = targets[layer] + g if layer in targets else g
    return targets


def solve(
    net: FeatureNet, problem: Problem, style: dict[str, torch.Tensor], params: SolverParams,
    iterations: int | None = None,
) -> tuple[torch.Tensor, SolveStats]:
    """Optimise the frame with L-BFGS: its pixels, or for a frame without temporal terms its
    coordinates over ``params.image_scales`` scales (:func:`multiscale_image`).

    Loss: content_weight·L_content + style_weight·mean_l L_style,l + tv_weight·L_tv +
    temporal_weight·Σ_j L_temporal,j (Gatys et al. 2016, Eq. 7; Ruder et al. 2016, Eq. 8);
    a problem with temporal terms uses ``warm_tv_weight`` for the TV term: its frame starts
    from strokes the TV term already smoothed in the frame before, and applying the full
    weight again at every frame of a chain softens them along the shot.

    Parameters
    ----------
    net : the perceptual network (frozen)
    problem : content frame, starting image and temporal targets
    style : target Gram matrices from :func:`style_targets`
    params : weights, iteration cap and tolerance
    iterations : override of ``params.iterations`` (a coarse-to-fine level's share)

    Returns
    -------
    image : (1, 3, H, W) in [0, 1]
    stats : iterations used and the final loss terms
    """
    content_layer = params.content_layer or net.content_layer
    layers = list(dict.fromkeys([*style, content_layer]))
    device = net.device
    features = functools.partial(_features, net, precision=params.precision)
    with torch.no_grad():
        content_target = features(problem.content.to(device), [content_layer])[content_layer]
    temporal = [(warped.to(device), weight.to(device)) for warped, weight in problem.temporal]
    start = problem.init.detach().to(device)
    sizes = scale_sizes(_size_of(start), 1 if temporal else params.image_scales)
    # the variable: the pixels (one scale), or the coordinates of every scale end to end
    z = torch.zeros(3 * sum(w * h for w, h in sizes), device=device, requires_grad=True)
    image = functools.partial(multiscale_image, start, sizes=sizes)
    tv_weight = params.tv_weight if not temporal or params.warm_tv_weight is None else params.warm_tv_weight
    # No line search: one evaluation per iteration, so "iterations" is also the cost unit.
    opt = LBFGS(z, _HISTORY)  # its buffers first, below the activations on the heap
    terms: dict[str, torch.Tensor] = {}

    @torch.enable_grad()  # as torch's optimisers evaluate a closure, even if solve() is called without
    def evaluate() -> None:
        """The loss terms at the image of ``z`` and the loss's gradient in ``z.grad``."""
        z.grad = None
        x = image(z)
        feats = features(x, layers)
        terms["style"] = sum(style_loss(gram_matrix(feats[l]), style[l]) for l in style) / len(style)
        terms["content"] = content_loss(feats[content_layer], content_target)
        terms["temporal"] = sum((temporal_loss(x, w, c) for w, c in temporal), x.new_zeros(()))
        loss = (params.style_weight * terms["style"] + params.content_weight * terms["content"]
                + tv_weight * total_variation(x) + params.temporal_weight * terms["temporal"])
        loss.backward()
        terms.update({k: v.detach() for k, v in terms.items()}, total=loss.detach())

    cap = params.iterations if iterations is None else iterations
    calls, previous = 0, None
    while calls < cap:
        evaluate()
        calls += 1
        if not opt.step():
            break  # no descent direction: a stationary point
        if calls % _CHUNK == 0:
            loss = float(terms["total"])
            if previous is not None and previous - loss < params.tolerance * _CHUNK / 10 * abs(previous):
                break
            previous = loss
    stats = SolveStats(calls, float(terms["style"]), float(terms["content"]), float(terms["temporal"]))
    with torch.no_grad():
        return image(z).clamp(0.0, 1.0).cpu(), stats


def scale_sizes(size: tuple[int, int], scales: int) -> list[tuple[int, int]]:
    """Sizes (w, h) of the scales an image of ``size`` is optimised over: the image's own, then
    each halving (rounded, at least 1 pixel), ``scales`` in all."""
    w, h = size
    return [(max(1, round(w / 2**k)), max(1, round(h / 2**k))) for k in range(scales)]


def multiscale_image(start: torch.Tensor, z: torch.Tensor, sizes: Sequence[tuple[int, int]]) -> torch.Tensor:
    """The image ``start`` + Σ_k up(z_k): coordinates z_k at each of ``sizes`` (finest first),
    upsampled bilinearly to the image's size.

    An image parametrised over scales, after the Laplacian-pyramid parametrisation of
    Mordvintsev et al. 2018 ("Differentiable Image Parameterizations", Distill): the gradient
    reaches a coarse coordinate summed over the pixels it covers, so L-BFGS moves broad areas
    in few steps where per-pixel gradients alone change them slowly. A shot's first frame at
    1280×720 (benchmarks/hd_speed.py, three levels of three scales against pixels with the
    finer levels' old shares) took 23.0 s and 196 iterations instead of 34.4 s and 328, and
    the warm frames after it came out with 0.85 × the style loss and 0.69 × the warping
    error. With one size, z is the pixels' change from ``start``.

    start : (1, 3, H, W); z : (3·Σ w·h,) the coordinates end to end, finest first
    Returns (1, 3, H, W)
    """
    image, offset = start, 0
    for w, h in sizes:
        coords = z[offset:offset + 3 * w * h].view(1, 3, h, w)
        image = image + resize_tensor(coords, _size_of(start))
        offset += 3 * w * h
    return image


def _features(net: FeatureNet, image: torch.Tensor, layers: Sequence[str], precision: str) -> dict[str, torch.Tensor]:
    """The network's activations, in float32 whatever the precision of its arithmetic.

    With ``precision="bfloat16"`` the network runs under autocast (convolutions in
    bfloat16); the activations are cast back so Gram matrices and losses stay float32.
    """
    with torch.autocast(image.device.type, dtype=torch.bfloat16, enabled=precision == "bfloat16"):
        feats = net(image, layers)
    return {name: value.float() for name, value in feats.items()}


def solve_coarse_to_fine(
    net: FeatureNet, problem: Problem, targets: Callable[[tuple[int, int]], dict[str, torch.Tensor]],
    params: SolverParams,
) -> tuple[torch.Tensor, SolveStats]:
    """Solve at 1/2**(levels−1) of the size first, then upsample and refine at each doubling.

    Coarse-to-fine optimisation (Gatys et al. 2017, "Controlling Perceptual Factors in Neural
    Style Transfer", Sec. 6) places large structures cheaply at low resolution, which makes
    large frames practical on a CPU: the coarsest level gets the full iteration cap, each
    finer level (4× the pixels a level) cap / 4**(levels−1), at least 10 and at most the
    cap, as it refines an upsampled solution; solved over scales (``params.image_scales``)
    the coarsest level leaves the levels between little more to do than the finest (at
    1280×720 a middle level of 20 iterations instead of 75 saved 6 s of a 30 s first frame
    for +7 % style and +1 % content loss, both still far below the pixels' with 75). A frame
    without temporal terms uses ``params.levels``; a warm-started frame ``params.warm_levels``,
    with its temporal terms (Ruder et al. 2016) at every level, and each finer level starts
    from the warped start plus the coarser level's upsampled correction of it, so the warped
    frame's fine detail is kept.

    Parameters
    ----------
    targets : style targets for a frame size (w, h), e.g. :meth:`framestyle.style.look.Look.targets`
    params : ``levels`` (None: :func:`coarse_levels`) and ``warm_levels`` (1 = plain :func:`solve`)

    Returns
    -------
    image, stats (iterations summed over the levels)
    """
    h, w = problem.content.shape[-2:]
    levels = params.warm_levels if problem.temporal else params.levels or coarse_levels((w, h))
    sizes = level_sizes((w, h), levels, net.min_side)
    image, used = None, 0
    cap = (problem.temporal and params.warm_iterations) or params.iterations
    for k, size in enumerate(sizes):
        level = _at_size(problem, size, image)
        share = cap if k == 0 else min(cap, max(2 * _CHUNK, cap // 4 ** (len(sizes) - 1)))
        image, stats = solve(net, level, targets(size), params, share)
        used += stats.iterations
    return image, replace(stats, iterations=used)


def level_sizes(size: tuple[int, int], levels: int, min_side: int) -> list[tuple[int, int]]:
    """The frame sizes (w, h) of ``levels`` coarse-to-fine levels for a frame of ``size``,
    coarsest first: 1/2**(levels−1), ..., 1/2, 1 of it, without the levels whose smaller side
    would be under the network's ``min_side`` (so fewer levels than asked at small sizes)."""
    w, h = size
    sizes = [(round(w / 2**k), round(h / 2**k)) for k in reversed(range(levels))]
    return [s for s in sizes[:-1] if min(s) >= min_side] + [(w, h)]


def coarse_levels(size: tuple[int, int]) -> int:
    """Default levels for a frame of ``size`` (w, h), by its longer side: 1 up to 640 pixels,
    else enough that the coarsest level's is at most 480 (960 → 2, 1280 → 3, 1920 → 3), so a
    portrait frame gets the levels of its landscape twin.

    Measured on a 1280×720 first frame (benchmarks/coarse_to_fine.py): three levels 96 s,
    one level 281 s; the warm-started frames that follow refine it at full size.
    """
    side = max(size)
    return 1 if side <= 640 else 1 + math.ceil(math.log2(side / 480))


def _at_size(problem: Problem, size: tuple[int, int], coarser: torch.Tensor | None) -> Problem:
    """``problem`` resized to ``size`` (w, h), starting from the coarser level's result if any.

    coarser : (1, 3, h', w') the solution one level down, or None at the coarsest level
    """
    start = resize_tensor(problem.init, size)
    if coarser is not None and problem.temporal:  # the warped start, corrected at low frequencies
        start = start + resize_tensor(coarser - resize_tensor(problem.init, _size_of(coarser)), size)
    elif coarser is not None:
        start = resize_tensor(coarser, size)
    temporal = [(resize_tensor(warped, size), resize_tensor(weight, size)) for warped, weight in problem.temporal]
    return Problem(resize_tensor(problem.content, size), start, temporal)


def _size_of(image: torch.Tensor) -> tuple[int, int]:
    """(w, h) of a (B, C, H, W) tensor."""
    return image.shape[-1], image.shape[-2]
