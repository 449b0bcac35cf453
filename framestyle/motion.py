"""Motion: optical flow, backward warping, flow reliability (occlusion) masks.

Conventions: images are float32 ``(H, W, 3)`` RGB in [0, 1]; a flow is float32 ``(H, W, 2)`` in
pixels, channel 0 = dx (columns), channel 1 = dy (rows); masks are float32 ``(H, W)``.

A flow ``f = compute_flow(src, dst)`` means ``src(p) ≈ dst(p + f(p))``, so ``warp(dst, f)``
brings ``dst`` into the pixel grid of ``src``. The render brings the previous stylised frame into
the current frame with ``warp(prev_stylised, compute_flow(cur_src, prev_src))``.

References
----------
Kroeger, Timofte, Dai & Van Gool (2016), "Fast Optical Flow using Dense Inverse Search", ECCV.
Ruder, Dosovitskiy & Brox (2016), "Artistic style transfer for videos", GCPR, Sec. 3.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import cv2
import numpy as np

FLOW_PRESETS = ("ultrafast", "fast", "medium")
WARP_FILTERS = ("linear", "cubic", "lanczos")

_FILTER_IDS = {"linear": cv2.INTER_LINEAR, "cubic": cv2.INTER_CUBIC, "lanczos": cv2.INTER_LANCZOS4}

_PRESET_IDS = {
    "ultrafast": cv2.DISOPTICAL_FLOW_PRESET_ULTRAFAST,
    "fast": cv2.DISOPTICAL_FLOW_PRESET_FAST,
    "medium": cv2.DISOPTICAL_FLOW_PRESET_MEDIUM,
}

# Thresholds of the forward-backward consistency check, Ruder et al. (2016), Sec. 3.
_DISOCC_REL, _DISOCC_ABS = 0.01, 0.5
_BOUNDARY_REL, _BOUNDARY_ABS = 0.01, 0.002


def _to_gray_u8(image: np.ndarray) -> np.ndarray:
    gray = cv2.cvtColor(np.clip(image, 0.0, 1.0).astype(np.float32), cv2.COLOR_RGB2GRAY)
    return np.rint(gray * 255.0).astype(np.uint8)


def check_rgb(name: str, image: np.ndarray) -> None:
    """Raise ValueError unless ``image`` is an (H, W, 3) array."""
    if not isinstance(image, np.ndarray) or image.ndim != 3 or image.shape[2] != 3:
        raise ValueError(f"{name} must be an (H, W, 3) RGB array, got {getattr(image, 'shape', type(image))}")


def _check_flow(name: str, flow: np.ndarray) -> None:
    if not isinstance(flow, np.ndarray) or flow.ndim != 3 or flow.shape[2] != 2:
        raise ValueError(f"{name} must be an (H, W, 2) flow array, got {getattr(flow, 'shape', type(flow))}")


def compute_flow(src: np.ndarray, dst: np.ndarray, preset: str = "medium") -> np.ndarray:
    """Dense optical flow from ``src`` to ``dst`` with DIS (Kroeger et al., 2016).

    The flow is computed on 8-bit grayscale versions (ITU-R BT.601 luma weights, as OpenCV's
    RGB2GRAY) of the two frames.

    Determinism: with no initial flow, OpenCV's DIS gives bit-identical results across repeated
    calls, reused or fresh objects and any ``cv2.setNumThreads`` value (checked for OpenCV 5.0 at
    up to 1280x720 and guarded by the tests), so a resumed render equals an uninterrupted one.

    Parameters
    ----------
    src, dst : np.ndarray
        Float RGB images ``(H, W, 3)`` in [0, 1] (values outside are clipped), same shape.
    preset : str
        One of ``FLOW_PRESETS``; slower presets give smoother, more accurate flow.

    Returns
    -------
    np.ndarray
        Flow ``(H, W, 2)`` float32 (dx, dy) in pixels with ``src(p) ≈ dst(p + flow(p))``.

    Raises
    ------
    ValueError
        On an unknown preset, non-RGB input, shapes that differ, or an image too small for DIS.

    References
    ----------
    Kroeger, Timofte, Dai & Van Gool (2016), "Fast Optical Flow using Dense Inverse Search", ECCV.
    """
    if preset not in _PRESET_IDS:
        raise ValueError(f"unknown flow preset {preset!r}; expected one of {FLOW_PRESETS}")
    check_rgb("src", src)
    check_rgb("dst", dst)
    if src.shape != dst.shape:
        raise ValueError(f"src and dst differ in shape: {src.shape} vs {dst.shape}")
    try:
        flow = cv2.DISOpticalFlow_create(_PRESET_IDS[preset]).calc(_to_gray_u8(src), _to_gray_u8(dst), None)
    except cv2.error as exc:
        raise ValueError(f"DIS optical flow cannot handle a {src.shape[0]}x{src.shape[1]} image") from exc
    return flow.astype(np.float32, copy=False)


def _sq_norm(flow: np.ndarray) -> np.ndarray:
    """Per-pixel squared length |f|² of an ``(H, W, 2)`` flow, in float64."""
    return np.sum(np.square(flow, dtype=np.float64), axis=-1)


def _sample_coords(flow: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Absolute sampling positions ``p + flow(p)`` as float32 (x, y) maps."""
    h, w = flow.shape[:2]
    xs, ys = np.meshgrid(np.arange(w, dtype=np.float32), np.arange(h, dtype=np.float32))
    return xs + flow[..., 0], ys + flow[..., 1]


def warp(image: np.ndarray, flow: np.ndarray, interpolation: str = "linear") -> np.ndarray:
    """Backward-warp ``image`` by ``flow``: ``out(p) = image(p + flow(p))``.

    Positions outside the image take the nearest border value (``BORDER_REPLICATE``); use
    ``reliability_mask`` to know which pixels are meaningful. OpenCV's remap quantises the
    sub-pixel position to 1/32 px (its interpolation table), which bounds the extra error.

    A warp at a sub-pixel offset low-pass filters the image: bilinear interpolation at a
    half-pixel offset removes the finest detail (a period-2 pattern) entirely, and a chain of
    warps compounds the loss. ``"cubic"`` (Keys' cubic convolution, 4×4 taps) and
    ``"lanczos"`` (Lanczos windowed sinc, 8×8 taps) keep more of it, at a few times the cost;
    both can overshoot a little beyond the input's range next to sharp edges.

    Parameters
    ----------
    image : np.ndarray
        ``(H, W)`` or ``(H, W, C)`` array (converted to float32).
    flow : np.ndarray
        ``(H, W, 2)`` flow (dx, dy) in pixels, same H and W as ``image``.
    interpolation : str
        One of ``WARP_FILTERS``: OpenCV's ``INTER_LINEAR``, ``INTER_CUBIC`` or ``INTER_LANCZOS4``.

    Returns
    -------
    np.ndarray
        float32 array of the same shape as ``image``.

    References
    ----------
    Keys (1981), "Cubic convolution interpolation for digital image processing", IEEE TASSP.
    """
    _check_flow("flow", flow)
    if interpolation not in _FILTER_IDS:
        raise ValueError(f"unknown warp filter {interpolation!r}; expected one of {WARP_FILTERS}")
    if not isinstance(image, np.ndarray) or image.ndim not in (2, 3) or image.shape[:2] != flow.shape[:2]:
        raise ValueError(
            f"image must be (H, W) or (H, W, C) with (H, W) = {flow.shape[:2]}, "
            f"got {getattr(image, 'shape', type(image))}"
        )
    map_x, map_y = _sample_coords(flow.astype(np.float32, copy=False))
    out = cv2.remap(image.astype(np.float32, copy=False), map_x, map_y, _FILTER_IDS[interpolation],
                    borderMode=cv2.BORDER_REPLICATE)
    # remap drops a trailing channel axis of length 1; give back the input's shape.
    return out.reshape(image.shape)


def reliability_mask(flow_back: np.ndarray, flow_fwd: np.ndarray) -> np.ndarray:
    """Forward-backward consistency mask of Ruder et al. (2016), Sec. 3.

    For the current frame, ``flow_back`` is ŵ = flow current → previous (the flow used for
    warping) and ``flow_fwd`` is the flow previous → current. With w̃(p) = flow_fwd(p + ŵ(p))
    (i.e. ``warp(flow_fwd, flow_back)``), a pixel is

    * disoccluded where  |w̃ + ŵ|² > 0.01 (|w̃|² + |ŵ|²) + 0.5,
    * on a motion boundary where  |∇û|² + |∇v̂|² > 0.01 |ŵ|² + 0.002,

    with û, v̂ the x and y components of ŵ. The gradients use central differences in the
    interior and one-sided differences on the image border (``np.gradient``). Pixels whose
    ``p + ŵ(p)`` falls outside the image are unreliable too; the image spans
    [-0.5, W - 0.5] x [-0.5, H - 0.5] since each pixel covers the unit square around its centre.

    Parameters
    ----------
    flow_back : np.ndarray
        ``(H, W, 2)`` flow current → previous.
    flow_fwd : np.ndarray
        ``(H, W, 2)`` flow previous → current.

    Returns
    -------
    np.ndarray
        ``(H, W)`` float32 mask, 0 at unreliable pixels and 1 elsewhere.

    References
    ----------
    Ruder, Dosovitskiy & Brox (2016), "Artistic style transfer for videos", GCPR, Sec. 3.
    """
    _check_flow("flow_back", flow_back)
    _check_flow("flow_fwd", flow_fwd)
    if flow_back.shape != flow_fwd.shape:
        raise ValueError(f"flow_back and flow_fwd differ in shape: {flow_back.shape} vs {flow_fwd.shape}")
    w_hat = flow_back.astype(np.float32, copy=False)
    w_tilde = warp(flow_fwd, w_hat)
    w_hat_sq = _sq_norm(w_hat)
    disoccluded = _sq_norm(w_tilde + w_hat) > _DISOCC_REL * (_sq_norm(w_tilde) + w_hat_sq) + _DISOCC_ABS

    du_dy, du_dx = np.gradient(w_hat[..., 0].astype(np.float64))
    dv_dy, dv_dx = np.gradient(w_hat[..., 1].astype(np.float64))
    grad_sq = du_dx**2 + du_dy**2 + dv_dx**2 + dv_dy**2
    boundary = grad_sq > _BOUNDARY_REL * w_hat_sq + _BOUNDARY_ABS

    return (~(disoccluded | boundary | _outside(w_hat))).astype(np.float32)


def _outside(flow: np.ndarray) -> np.ndarray:
    """(H, W) bool: where ``p + flow(p)`` leaves the image. Pixel p covers the unit square
    around its centre, so the image spans [-0.5, W - 0.5] x [-0.5, H - 0.5]."""
    h, w = flow.shape[:2]
    map_x, map_y = _sample_coords(flow.astype(np.float32, copy=False))
    return (map_x < -0.5) | (map_x > w - 0.5) | (map_y < -0.5) | (map_y > h - 0.5)


def inside_mask(flow: np.ndarray) -> np.ndarray:
    """``(H, W)`` float32: 1 where ``p + flow(p)`` lands inside the image, 0 where it leaves it.

    For the backward flow current → earlier, the 0s are the picture that has entered the frame
    across its edges since the earlier frame.
    """
    _check_flow("flow", flow)
    return (~_outside(flow)).astype(np.float32)


def long_term_masks(masks: Sequence[np.ndarray]) -> list[np.ndarray]:
    """Long-term consistency weights of Ruder et al. (2016), Sec. 3.2.

    Given reliability masks c^(j) for frame offsets j ordered from the most recent (first) to the
    oldest (last), returns

        c_long^(j) = max(c^(j) − Σ_{k < j} c^(k), 0),

    the sum running over the more recent masks, so each pixel is tied only to the most recent
    frame in which it was visible.

    Parameters
    ----------
    masks : Sequence[np.ndarray]
        ``(H, W)`` masks in [0, 1], all the same shape; may be empty.

    Returns
    -------
    list[np.ndarray]
        ``(H, W)`` float32 weights, one per input mask, in the same order.

    References
    ----------
    Ruder, Dosovitskiy & Brox (2016), "Artistic style transfer for videos", GCPR, Sec. 3.2.
    """
    masks = [np.asarray(m, dtype=np.float32) for m in masks]
    if masks and any(m.ndim != 2 or m.shape != masks[0].shape for m in masks):
        raise ValueError(f"masks must all be (H, W) of one shape, got {[m.shape for m in masks]}")
    out: list[np.ndarray] = []
    more_recent = np.zeros(masks[0].shape, np.float32) if masks else None
    for mask in masks:
        out.append(np.maximum(mask - more_recent, 0.0).astype(np.float32))
        more_recent = more_recent + mask
    return out


@dataclass(frozen=True)
class FlowPair:
    """Optical flow both ways between a frame and an earlier frame of its shot.

    Computed once per pair of frames and shared by everything that needs the motion between
    them: the starting image and temporal loss of the later frame (Ruder et al. 2016) and the
    warping error of the pair (Lai et al. 2018).

    Attributes
    ----------
    backward : (H, W, 2) flow current → earlier; ``warp(earlier_image, backward)`` brings the
        earlier frame into the current frame's pixel grid
    forward : (H, W, 2) flow earlier → current
    """

    backward: np.ndarray
    forward: np.ndarray

    @classmethod
    def between(cls, current: np.ndarray, earlier: np.ndarray, preset: str = "medium") -> "FlowPair":
        """DIS flow both ways between (H, W, 3) frames ``current`` and ``earlier``."""
        return cls(compute_flow(current, earlier, preset), compute_flow(earlier, current, preset))

    def current_mask(self) -> np.ndarray:
        """(H, W) reliability of the current frame's pixels (disocclusions, motion boundaries)."""
        return reliability_mask(self.backward, self.forward)

    def earlier_mask(self) -> np.ndarray:
        """(H, W) reliability of the earlier frame's pixels, the mask of the warping error."""
        return reliability_mask(self.forward, self.backward)
