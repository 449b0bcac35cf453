"""2.5-D layer compositing for the demo clip: depth layers, a moving camera, anti-aliased shapes.

Each depth layer is painted once as a large premultiplied RGBA image in rest-frame
coordinates; a frame is composited back to front from sub-pixel affine warps of the layers,
with nearer layers moving and scaling more (parallax). Frames are rendered at ``SS`` times
the output size and area-averaged down, which anti-aliases edges and keeps motion smooth.
"""

from __future__ import annotations

from dataclasses import dataclass

import cv2
import numpy as np

OUT_W, OUT_H = 320, 180
SS = 2  # supersampling factor
W, H = OUT_W * SS, OUT_H * SS
MARGIN = 24  # spare layer pixels around the widest camera excursion


@dataclass
class Camera:
    """Per-frame pan (frame px at parallax 1, supersampled) and zoom (at parallax 1)."""

    pan_x: np.ndarray
    pan_y: np.ndarray
    zoom: np.ndarray


class Layer:
    """A premultiplied RGBA image at one depth, drawn in rest-frame coordinates.

    ``parallax`` scales the camera pan and zoom for this layer (0 = at infinity, 1 = the
    reference depth). ``velocity`` is the layer's own motion in px per frame; ``spin`` turns
    it about ``pivot`` (rest-frame coordinates) by that many radians per frame, clockwise on
    screen, as a rolling object does.
    """

    def __init__(
        self,
        cam: Camera,
        parallax: float,
        velocity: tuple[float, float] = (0.0, 0.0),
        spin: float = 0.0,
        pivot: tuple[float, float] = (0.0, 0.0),
    ):
        self.parallax, self.velocity, self.spin = parallax, velocity, spin
        frames = np.arange(len(cam.pan_x))
        ex = parallax * cam.pan_x - velocity[0] * frames
        ey = parallax * cam.pan_y - velocity[1] * frames
        self.off_x = MARGIN - ex.min()
        self.off_y = MARGIN - ey.min()
        self.pivot = np.array([pivot[0] + self.off_x, pivot[1] + self.off_y])  # layer pixels
        w = int(np.ceil(W + ex.max() - ex.min() + 2 * MARGIN))
        h = int(np.ceil(H + ey.max() - ey.min() + 2 * MARGIN))
        self.rgba = np.zeros((h, w, 4), np.float32)
        self.xs = (np.arange(w, dtype=np.float32) - self.off_x)[None, :]  # frame x per column
        self.ys = (np.arange(h, dtype=np.float32) - self.off_y)[:, None]  # frame y per row

    @property
    def shape(self) -> tuple[int, int]:
        return self.rgba.shape[:2]

    def paint(self, mask: np.ndarray, colour) -> None:
        """Composite ``colour`` (RGB triple or (h, w, 3) field) over the layer through ``mask``."""
        rows, cols = np.flatnonzero(mask.any(axis=1)), np.flatnonzero(mask.any(axis=0))
        if rows.size == 0:
            return
        box = np.s_[rows[0] : rows[-1] + 1, cols[0] : cols[-1] + 1]  # only touch the shape's bounds
        m = mask[box][..., None]
        colour = np.broadcast_to(np.asarray(colour, np.float32), self.shape + (3,))[box]
        dst = self.rgba[box]
        dst[..., :3] = dst[..., :3] * (1 - m) + colour * m
        dst[..., 3:] = dst[..., 3:] * (1 - m) + m

    def mask(self) -> "Mask":
        return Mask(self)

    def warp_matrix(self, cam: Camera, t: int) -> np.ndarray:
        """2x3 affine map from layer pixels to supersampled frame pixels at frame ``t``."""
        p = self.parallax
        s = 1.0 + p * (cam.zoom[t] - 1.0)
        cx = W / 2 + self.off_x + p * cam.pan_x[t] - self.velocity[0] * t
        cy = H / 2 + self.off_y + p * cam.pan_y[t] - self.velocity[1] * t
        c, n = np.cos(self.spin * t), np.sin(self.spin * t)
        rot = np.array([[c, -n], [n, c]])
        shift = s * (self.pivot - rot @ self.pivot) + (W / 2 - s * cx, H / 2 - s * cy)
        return np.hstack([s * rot, shift[:, None]]).astype(np.float32)


class Mask:
    """Anti-aliased shape rasteriser in a layer's rest-frame coordinates (sub-pixel, 4 bits)."""

    def __init__(self, layer: Layer):
        self.layer = layer
        self.img = np.zeros(layer.shape, np.uint8)

    def _pts(self, pts) -> np.ndarray:
        p = np.asarray(pts, np.float64) + (self.layer.off_x, self.layer.off_y)
        return np.round(p * 16).astype(np.int32).reshape(-1, 1, 2)

    def poly(self, pts) -> "Mask":
        cv2.fillPoly(self.img, [self._pts(pts)], 255, cv2.LINE_AA, shift=4)
        return self

    def line(self, pts, thickness: int) -> "Mask":
        cv2.polylines(self.img, [self._pts(pts)], False, 255, thickness, cv2.LINE_AA, shift=4)
        return self

    def circle(self, c, r: float) -> "Mask":
        ((cx, cy),) = self._pts([c]).reshape(1, 2)
        cv2.circle(self.img, (int(cx), int(cy)), int(round(r * 16)), 255, -1, cv2.LINE_AA, shift=4)
        return self

    def ellipse(self, c, axes, angle: float = 0.0, arc: tuple[float, float] = (0, 360)) -> "Mask":
        ((cx, cy),) = self._pts([c]).reshape(1, 2)
        ax = (int(round(axes[0] * 16)), int(round(axes[1] * 16)))
        cv2.ellipse(self.img, (int(cx), int(cy)), ax, angle, *arc, 255, -1, cv2.LINE_AA, shift=4)
        return self

    def rect(self, x0, y0, x1, y1) -> "Mask":
        return self.poly([(x0, y0), (x1, y0), (x1, y1), (x0, y1)])

    def get(self) -> np.ndarray:
        return self.img.astype(np.float32) / 255.0


def render(layers: list[Layer], cam: Camera, t: int) -> np.ndarray:
    """Composite the layers back to front for frame ``t``; returns uint8 RGB at output size."""
    acc = np.zeros((H, W, 3), np.float32)
    for layer in layers:
        warped = cv2.warpAffine(
            layer.rgba,
            layer.warp_matrix(cam, t),
            (W, H),
            flags=cv2.INTER_LINEAR,
            borderMode=cv2.BORDER_CONSTANT,
        )
        acc = acc * (1 - warped[..., 3:]) + warped[..., :3]
    small = cv2.resize(acc, (OUT_W, OUT_H), interpolation=cv2.INTER_AREA)
    return np.round(np.clip(small, 0, 1) * 255).astype(np.uint8)


def vertical_gradient(layer: Layer, y0: float, y1: float, c0, c1, power: float = 1.0) -> np.ndarray:
    """An (h, w, 3) colour field running from ``c0`` at row ``y0`` to ``c1`` at row ``y1``."""
    t = np.clip((layer.ys - y0) / (y1 - y0), 0, 1)[..., None] ** power
    field = (1 - t) * c0 + t * c1
    return np.broadcast_to(field, layer.shape + (3,))


def glow(layer: Layer, c, sigma: float) -> np.ndarray:
    """A Gaussian spot of width ``sigma`` centred on ``c``, 1 at the centre."""
    d2 = (layer.xs - c[0]) ** 2 + (layer.ys - c[1]) ** 2
    return np.exp(-d2 / (2 * sigma**2)).astype(np.float32)


def ridge_fill(layer: Layer, ridge: np.ndarray) -> np.ndarray:
    """Soft mask of everything below a per-column ridgeline (1 px anti-aliased edge)."""
    return np.clip(layer.ys - ridge[None, :] + 0.5, 0, 1).astype(np.float32)
