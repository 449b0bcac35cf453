"""A frame's starting image and temporal targets, from the stylised frames around it.

Each shot starts fresh; within a shot each frame starts from the previous stylised frame
warped along the optical flow and is tied to earlier frames by the short- and long-term
temporal losses (Ruder, Dosovitskiy & Brox 2016, "Artistic style transfer for videos").
A multi-pass render then goes over the shot again, backward and forward in turn, each frame
starting from a blend of its own last result and its neighbour in the pass's direction
(the same paper's multi-pass algorithm). Along every pass the total-variation weight of
the warm-started frames is steered so that the chain keeps the stroke detail of frames
solved on their own (:func:`steered_tv`).
"""

from __future__ import annotations

from typing import Sequence

import numpy as np
import torch

from framestyle.finish.colour import match_histograms
from framestyle.imaging import to_tensor
from framestyle.motion import FlowPair, inside_mask, long_term_masks, warp
from framestyle.style.solver import Problem

NOISE = 0.1  # std of the noise added where a frame starts from its content frame
BLEND = 0.5  # δ, the neighbour's share of a multi-pass start (Ruder et al. 2016 used 0.5; from memory)
STEER_GAIN = 1.0  # γ of steered_tv: how much of a detail error one frame corrects (in log terms)
STEER_RANGE = (0.25, 2.0)  # steered TV weights stay within these multiples of the base weight
DETAIL_AIM = 1.05  # a of steered_tv: the chain aims this far above a probe's stroke detail


def start_noise(shape: tuple[int, ...], seed: int, frame: int) -> torch.Tensor:
    """Seeded noise, a function of (seed, frame) only, so resumed frames get the same noise."""
    gen = torch.Generator().manual_seed(seed * 1_000_003 + frame)
    return torch.randn(shape, generator=gen) * NOISE


def fresh_problem(content: np.ndarray, noise: torch.Tensor) -> Problem:
    """A frame optimised on its own, starting from its content frame plus noise.

    content : (H, W, 3) source frame at working size; noise : (1, 3, H, W)
    """
    return Problem(to_tensor(content), to_tensor(content) + noise)


def temporal_problem(
    content: np.ndarray, earlier: Sequence[tuple[FlowPair, np.ndarray]], noise: torch.Tensor,
    interpolation: str = "linear",
) -> Problem:
    """Starting image and temporal targets of a frame from earlier stylised frames.

    Parameters
    ----------
    content : (H, W, 3) source frame at working size, as the solver sees it
    earlier : (flows between this frame and an earlier one, that frame stylised (H, W, 3)),
        most recent first; the first is the previous frame
    noise : (1, 3, H, W) noise for pixels that start from the content frame
    interpolation : the warp's resampling filter (:data:`framestyle.motion.WARP_FILTERS`)

    The frame starts from the previous stylised frame warped into it along the backward flow
    (Ruder et al. 2016, Sec. 3.1), except the picture that has entered across the frame's
    edges since (the flow leads outside the previous frame: :func:`inside_mask`), which
    starts from the content frame plus noise instead of from smeared border pixels, the
    content's colours histogram-matched to the warped frame's (:func:`match_histograms`):
    the few iterations a following frame gets leave it closer to the footage than the paint
    beside it, and the temporal loss then carries it inward (bikes.mp4 at 480×204, 30 frames
    from 40 and from 80, the camera panning: the following frames' style loss 10 % and 21 %
    lower, content +0 % and +3 %, warping error −2 % and −1 %; from 190 and bigbuckbunny.mp4,
    little or no picture entering, the same). The
    other pixels the forward-backward check marks unreliable (disocclusions, motion
    boundaries) keep the warped start, as in the paper: the temporal loss does not hold them
    (weight 0), so the style loss repaints them, and from a start close to the paint around
    them it does so in about half the iterations of a start from the content frame (bikes.mp4
    at 640×272, frames 40–47: 124 → 61 iterations, warping error −42 %). Each
    earlier frame j gives a temporal target with the long-term weights of Ruder et al. 2016
    (Sec. 3.2), so a pixel is tied only to the most recent frame in which it was visible.
    """
    warped = [_warped(stylised, flows, interpolation) for flows, stylised in earlier]
    masks = [flows.current_mask() for flows, _ in earlier]
    weights = long_term_masks(masks)
    inside = inside_mask(earlier[0][0].backward)
    painted = content if inside.all() or not inside.any() else match_histograms(content, warped[0][inside > 0][None])
    targets = [to_tensor(w) for w in warped]
    kept = torch.from_numpy(inside)[None, None]
    init = kept * targets[0] + (1 - kept) * (to_tensor(painted) + noise)
    pairs = [(target, torch.from_numpy(c)[None, None]) for target, c in zip(targets, weights)]
    return Problem(to_tensor(content), init, pairs)


def pass_start(previous: np.ndarray, warped: np.ndarray, mask: np.ndarray, delta: float = BLEND) -> np.ndarray:
    """The start of a frame in a pass after the first (Ruder et al. 2016, multi-pass algorithm).

        x'⁽ⁱ⁾₍ⱼ₎ = δ c ∘ ω(x⁽ⁿ⁾₍ⱼ₎) + (δ̄ 1 + δ c̄) ∘ x⁽ⁱ⁾₍ⱼ₋₁₎,   δ̄ = 1 − δ, c̄ = 1 − c

    with x⁽ⁱ⁾₍ⱼ₋₁₎ the frame's own result of the pass before, ω(x⁽ⁿ⁾₍ⱼ₎) its neighbour in
    this pass's direction (n = i − 1 going forward, i + 1 going backward), already solved
    in this pass and warped into frame i, and c the reliability of frame i's pixels for that
    warp (``c⁽ⁿ'ⁱ⁾``). The weights of the two images add up to 1 at every pixel; where the
    neighbour is not visible (c = 0) the frame keeps its own result.

    Parameters
    ----------
    previous, warped : (H, W, 3) arrays
    mask : (H, W) reliability c in [0, 1]
    delta : δ in [0, 1]

    Returns
    -------
    (H, W, 3) float32 array

    References
    ----------
    Ruder, Dosovitskiy & Brox (2016), "Artistic style transfer for videos", GCPR, the
    multi-pass algorithm (Sec. 3.3 as issue 15 cites it; section number not checked).
    """
    if not 0.0 <= delta <= 1.0:
        raise ValueError(f"delta must be in [0, 1], got {delta}")
    c = np.asarray(mask, np.float32)[..., None]  # (H, W, 1)
    return (delta * c * warped + ((1.0 - delta) + delta * (1.0 - c)) * previous).astype(np.float32)


def pass_problem(
    content: np.ndarray, previous: np.ndarray, neighbour: tuple[FlowPair, np.ndarray] | None,
    interpolation: str = "linear", delta: float = BLEND,
) -> Problem:
    """Starting image and temporal target of a frame in a pass after the first.

    Parameters
    ----------
    content : (H, W, 3) source frame at working size
    previous : (H, W, 3) the frame's own result of the pass before
    neighbour : (flows between this frame (current) and its neighbour in the pass's direction,
        the neighbour's result in this pass (H, W, 3)); None for the first frame of the pass
        (or of a chain inside the shot), which starts from its own result alone
    interpolation : the warp's resampling filter

    The start is :func:`pass_start`; the temporal loss ties the frame to the warped neighbour
    with the reliability mask as weights (Ruder et al. 2016, Eq. 7).
    """
    if neighbour is None:
        return Problem(to_tensor(content), to_tensor(previous))
    flows, stylised = neighbour
    warped = _warped(stylised, flows, interpolation)
    mask = flows.current_mask()
    start = pass_start(previous, warped, mask, delta)
    return Problem(to_tensor(content), to_tensor(start), [(to_tensor(warped), torch.from_numpy(mask)[None, None])])


def steered_tv(tv: float, energy: float, reference: float, base: float, gain: float = STEER_GAIN,
               aim: float = DETAIL_AIM) -> float:
    """The TV weight of a warm-started frame, steered from its predecessor's stroke detail.

        tv_t = clip(tv_{t−1} · (E_{t−1} / (a·E_ref))^γ,  0.25·base,  2·base)

    with E_{t−1} the Laplacian energy (:func:`framestyle.qc.detail.laplacian_energy`) of the
    previous frame's result, E_ref that of a nearby frame of the shot solved on its own,
    γ = ``gain`` and a = ``aim``. A chain that has gone softer than a·E_ref gets less
    smoothing, one that is busier gets more: a multiplicative (integral)
    controller, which corrects a steady drift — the blur each warp adds, and the total
    variation applied again to strokes already smoothed — rather than one frame's error. Our
    own rule (no paper): the temporal loss of Ruder et al. (2016) holds the paint steady,
    this holds its detail at what the style gives a frame solved alone.

    Parameters
    ----------
    tv : tv_{t−1}, the previous frame's TV weight
    energy, reference : E_{t−1} and E_ref, ≥ 0; where either is 0 (a flat frame: no detail to
        compare) the weight stays ``tv``
    base : the TV weight without steering (``warm_tv_weight``, else ``tv_weight``), ≥ 0
    gain : γ ≥ 0; 0 keeps ``tv``
    aim : a > 0. The frames of a shot solved on their own differ in stroke detail by about
        ±7 % from one to the next (measured on bigbuckbunny, 12 frames along its 132), so a
        probe's E_ref stands for the frames around it only to that: aiming at a = 1 leaves
        the chain softer than about half of them solved alone, a = 1.05 keeps it at or above
        them (benchmarks/multipass.py) at a small cost in steadiness

    Returns
    -------
    float, tv_t

    Examples
    --------
    >>> steered_tv(10.0, 1.5, 1.0, 10.0, aim=1.0)  # half as much detail again: 10 · 1.5
    15.0
    >>> steered_tv(10.0, 1.05, 1.0, 10.0)  # on the aim: unchanged
    10.0
    >>> steered_tv(10.0, 0.01, 1.0, 10.0)  # far too soft: held at a quarter of the base
    2.5
    """
    if energy <= 0 or reference <= 0:
        return tv
    low, high = STEER_RANGE
    return float(np.clip(tv * (energy / (aim * reference)) ** gain, low * base, high * base))


def _warped(stylised: np.ndarray, flows: FlowPair, interpolation: str) -> np.ndarray:
    """A stylised (H, W, 3) frame warped into the current frame, kept in [0, 1] (a cubic or
    Lanczos filter overshoots a little at sharp edges)."""
    return np.clip(warp(stylised, flows.backward, interpolation), 0.0, 1.0)
