"""Generate the bundled demo input: a two-shot 48-frame clip and two style images.

Everything is procedural and deterministic (fixed seeds, numpy + OpenCV only), so the files
in this folder can be regenerated pixel for pixel:

    python sample_clip/make_sample.py [--out DIR]

Shot 1 (frames 1-28): a camera drifts right and pushes in over a mountain lake in the
afternoon. Each depth layer (sky, far and middle ridges, forested hills with the lake, the
near shore, one close tree) is painted once as a large premultiplied RGBA image and every
frame is composited from sub-pixel affine warps of the layers; nearer layers move and scale
more (parallax). Shot 2 (frames 29-48), after one hard cut: a harbour town at night, the
camera pans left and pulls back while a boat crosses the water in front of the houses.

Frames are rendered at twice the output size and area-averaged down, which anti-aliases
edges and keeps motion smooth.
"""

from __future__ import annotations

import argparse
import sys
from dataclasses import dataclass
from pathlib import Path

import cv2
import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parent.parent))  # run from a plain checkout
from framestyle.atomic import write_bytes  # noqa: E402

OUT_W, OUT_H = 320, 180
SS = 2  # supersampling factor
W, H = OUT_W * SS, OUT_H * SS
SHOT1_FRAMES, SHOT2_FRAMES = 28, 20
MARGIN = 24  # spare layer pixels around the widest camera excursion
SEED = 20240611
STYLE_SIZE = 512


def rgb(r: int, g: int, b: int) -> np.ndarray:
    return np.array([r, g, b], np.float32) / 255.0


# --------------------------------------------------------------------------- noise


def noise_1d(
    rng: np.random.Generator, xs: np.ndarray, period: float, octaves: int = 5
) -> np.ndarray:
    """Fractal value noise along ``xs`` (smoothstep-interpolated octaves, gain 0.5)."""
    out = np.zeros(xs.shape, np.float64)
    for o in range(octaves):
        p = period / 2**o
        u = (xs - xs.min()) / p
        ctrl = rng.standard_normal(int(u.max()) + 2)
        i = u.astype(int)
        f = u - i
        f = f * f * (3 - 2 * f)
        out += 0.5**o * (ctrl[i] * (1 - f) + ctrl[i + 1] * f)
    return out


def noise_2d(
    rng: np.random.Generator, h: int, w: int, period_y: float, period_x: float, octaves: int = 4
) -> np.ndarray:
    """Smooth fractal noise (bicubic-upsampled random grids), roughly unit variance."""
    out = np.zeros((h, w), np.float32)
    for o in range(octaves):
        py, px = max(period_y / 2**o, 1.0), max(period_x / 2**o, 1.0)
        gh, gw = int(h / py) + 4, int(w / px) + 4
        grid = rng.standard_normal((gh, gw)).astype(np.float32)
        big = cv2.resize(grid, (int(gw * px), int(gh * py)), interpolation=cv2.INTER_CUBIC)
        out += 0.5**o * big[int(py) : int(py) + h, int(px) : int(px) + w]
    return out


def smoothstep(e0: float, e1: float, x: np.ndarray) -> np.ndarray:
    t = np.clip((x - e0) / (e1 - e0), 0.0, 1.0)
    return t * t * (3 - 2 * t)


# --------------------------------------------------------------------------- layers


@dataclass
class Camera:
    """Per-frame pan (frame px at parallax 1, supersampled) and zoom (at parallax 1)."""

    pan_x: np.ndarray
    pan_y: np.ndarray
    zoom: np.ndarray


class Layer:
    """A premultiplied RGBA image at one depth, drawn in rest-frame coordinates.

    ``parallax`` scales the camera pan and zoom for this layer (0 = at infinity, 1 = the
    reference depth). ``velocity`` is the layer's own motion in px per frame.
    """

    def __init__(self, cam: Camera, parallax: float, velocity: tuple[float, float] = (0.0, 0.0)):
        self.parallax, self.velocity = parallax, velocity
        frames = np.arange(len(cam.pan_x))
        ex = parallax * cam.pan_x - velocity[0] * frames
        ey = parallax * cam.pan_y - velocity[1] * frames
        self.off_x = MARGIN - ex.min()
        self.off_y = MARGIN - ey.min()
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
        p = self.parallax
        s = 1.0 + p * (cam.zoom[t] - 1.0)
        cx = W / 2 + self.off_x + p * cam.pan_x[t] - self.velocity[0] * t
        cy = H / 2 + self.off_y + p * cam.pan_y[t] - self.velocity[1] * t
        return np.array([[s, 0, W / 2 - s * cx], [0, s, H / 2 - s * cy]], np.float32)


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

    def ellipse(self, c, axes, angle: float = 0.0) -> "Mask":
        ((cx, cy),) = self._pts([c]).reshape(1, 2)
        ax = (int(round(axes[0] * 16)), int(round(axes[1] * 16)))
        cv2.ellipse(self.img, (int(cx), int(cy)), ax, angle, 0, 360, 255, -1, cv2.LINE_AA, shift=4)
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
    t = np.clip((layer.ys - y0) / (y1 - y0), 0, 1)[..., None] ** power
    field = (1 - t) * c0 + t * c1
    return np.broadcast_to(field, layer.shape + (3,))


def glow(layer: Layer, c, sigma: float) -> np.ndarray:
    d2 = (layer.xs - c[0]) ** 2 + (layer.ys - c[1]) ** 2
    return np.exp(-d2 / (2 * sigma**2)).astype(np.float32)


def ridge_fill(layer: Layer, ridge: np.ndarray) -> np.ndarray:
    """Soft mask of everything below a per-column ridgeline (1 px anti-aliased edge)."""
    return np.clip(layer.ys - ridge[None, :] + 0.5, 0, 1).astype(np.float32)


def conifer(m: Mask, x: float, base: float, height: float, width: float, tiers: int = 4) -> Mask:
    """Stacked-triangle fir silhouette with a short trunk."""
    trunk = height * 0.12
    m.rect(x - width * 0.06, base - trunk * 1.5, x + width * 0.06, base)
    top = base - height
    for k in range(tiers):
        ty = top + (height - trunk) * k / tiers * 0.85
        by = top + (height - trunk) * (k + 1.6) / (tiers + 0.6)
        half = width / 2 * (0.45 + 0.55 * (k + 1) / tiers)
        m.poly(
            [
                (x, ty),
                (x + half, by),
                (x + half * 0.3, by - 2),
                (x - half * 0.3, by - 2),
                (x - half, by),
            ]
        )
    return m


# --------------------------------------------------------------------------- shot 1


def shot1(rng: np.random.Generator) -> tuple[list[Layer], Camera]:
    t = np.arange(SHOT1_FRAMES, dtype=np.float64)
    cam = Camera(pan_x=5.6 * t + 0.02 * t**2, pan_y=-0.35 * t, zoom=1.0 + 0.0032 * t)
    layers = []

    sky = Layer(cam, 0.04)
    field = vertical_gradient(sky, -40, 215, rgb(62, 118, 196), rgb(236, 222, 196), 1.2).copy()
    sun = (470.0, 62.0)
    field += glow(sky, sun, 50)[..., None] * rgb(120, 90, 40) * 0.7
    field += glow(sky, sun, 22)[..., None] * rgb(90, 70, 30)
    cloud = noise_2d(rng, *sky.shape, 30, 140, 3)
    cover = smoothstep(0.55, 1.5, cloud) * smoothstep(170, 40, sky.ys) * 0.85
    shadow = smoothstep(0.9, 1.9, cloud) * 0.15
    cloud_col = rgb(250, 246, 240) - shadow[..., None] * rgb(140, 120, 130)
    field = field * (1 - cover[..., None]) + cloud_col * cover[..., None]
    sky.paint(np.ones(sky.shape, np.float32), np.clip(field, 0, 1))
    sky.paint(sky.mask().circle(sun, 15).get(), rgb(255, 250, 226))
    layers.append(sky)

    for parallax, base, amp, body, haze, snow in (
        (0.16, 175.0, 85.0, rgb(112, 124, 170), rgb(178, 184, 210), True),
        (0.34, 198.0, 58.0, rgb(78, 98, 128), rgb(136, 148, 170), False),
    ):
        ly = Layer(cam, parallax)
        xs = ly.xs[0].astype(np.float64)
        massif = np.tanh(noise_1d(rng, xs, 300, 3))  # broad rises and saddles
        summits = 1 - np.abs(noise_1d(rng, xs, 70, 3))  # ridged noise: sharp peaks
        ridge = base - amp * (0.5 + 0.35 * massif + 0.3 * summits) + 3 * noise_1d(rng, xs, 12, 2)
        slope = cv2.GaussianBlur(np.gradient(ridge)[None, :], (0, 0), 5)[0]
        depth = ly.ys - ridge[None, :]
        # Faces rising towards the sun (right) are lit near the crest; rocky facets below come
        # from the horizontal derivative of a smooth 2-D height noise.
        rock = noise_2d(rng, *ly.shape, 30, 30, 2)
        facets = 4.0 * np.gradient(rock, axis=1)
        light = np.tanh(-slope * 2.0)[None, :] * np.exp(-depth / 45) + facets
        colour = vertical_gradient(ly, base - amp, base + 30, body, haze, 1.5)
        colour = colour * (1 + 0.16 * light[..., None])
        if snow:
            snow_line = 14 + 10 * noise_1d(rng, xs, 40, 3)
            high = smoothstep(base - 0.35 * amp, base - 0.75 * amp, ridge)
            cap = smoothstep(2, -2, depth - snow_line[None, :] * high[None, :]) * (
                high[None, :] > 0.05
            )
            snow_col = rgb(236, 238, 246) * (1 + 0.12 * np.clip(light, -1, 1))[..., None]
            colour = colour * (1 - cap[..., None]) + snow_col * cap[..., None]
        else:
            forest = smoothstep(30, 70, depth) * smoothstep(
                -0.3, 0.6, noise_2d(rng, *ly.shape, 14, 40, 2)
            )
            colour = (
                colour * (1 - 0.4 * forest[..., None]) + rgb(60, 88, 72) * 0.4 * forest[..., None]
            )
        ly.paint(ridge_fill(ly, ridge), np.clip(colour, 0, 1))
        layers.append(ly)

    # Forested hills with the lake in front of them.
    hills = Layer(cam, 0.6)
    xs = hills.xs[0].astype(np.float64)
    shore = 240.0
    hill = 222 - 22 * noise_1d(rng, xs, 160, 3) - 4 * np.abs(np.sin(xs / 3.1))  # canopy bumps
    hill = np.minimum(hill, shore - 2)
    lake = vertical_gradient(
        hills, shore, H + 30, rgb(150, 176, 206), rgb(66, 104, 146), 0.8
    ).copy()
    depth_refl = hills.ys - shore
    refl = (depth_refl > 0) & (depth_refl < (shore - hill)[None, :] * 0.95)
    ripple = noise_2d(rng, *hills.shape, 3, 60, 2)
    lake = np.where(refl[..., None], lake * 0.55 + rgb(30, 60, 45) * 0.45, lake)
    streak = smoothstep(0.6, 1.4, ripple)[..., None] * (depth_refl > 3)[..., None]
    lake = lake * (1 - 0.35 * streak) + rgb(225, 230, 236) * 0.35 * streak
    hills.paint(ridge_fill(hills, np.full_like(xs, shore)), np.clip(lake, 0, 1))
    green = vertical_gradient(hills, 190, shore, rgb(62, 98, 66), rgb(38, 70, 48))
    shade = 1 + 0.14 * noise_2d(rng, *hills.shape, 10, 14, 2)[..., None]
    hills.paint(
        ridge_fill(hills, hill) * (1 - ridge_fill(hills, np.full_like(xs, shore))),
        np.clip(green * shade, 0, 1),
    )
    m = hills.mask()
    for x in rng.uniform(-80, xs.max(), 60):
        col = int(np.clip(x + hills.off_x, 0, len(hill) - 1))
        conifer(m, x, hill[col] + 8, rng.uniform(14, 26), rng.uniform(8, 12), 3)
    hills.paint(m.get(), rgb(34, 62, 44))
    layers.append(hills)

    # Near shore: meadow, rocks and trees.
    shore_l = Layer(cam, 1.0)
    xs = shore_l.xs[0].astype(np.float64)
    ground = 292 - 14 * noise_1d(rng, xs, 200, 3)
    meadow = vertical_gradient(shore_l, 270, H + 40, rgb(132, 158, 70), rgb(74, 112, 44))
    patches = noise_2d(rng, *shore_l.shape, 24, 90, 1)[..., None]
    meadow = meadow * (1 + 0.06 * patches)
    bank = smoothstep(0, 5, shore_l.ys - ground[None, :])[..., None]  # dark wet edge
    meadow = meadow * (0.75 + 0.25 * bank)
    shore_l.paint(ridge_fill(shore_l, ground), np.clip(meadow, 0, 1))
    for x in rng.uniform(-40, xs.max() - 40, 9):
        col = int(np.clip(x + shore_l.off_x, 0, len(ground) - 1))
        r = rng.uniform(7, 16)
        cy = ground[col] + r * 0.3
        rock = shore_l.mask().ellipse((x, cy), (r * 1.5, r), rng.uniform(-15, 15)).get()
        tone = vertical_gradient(shore_l, cy - r, cy + r, rgb(168, 164, 156), rgb(88, 86, 84))
        shore_l.paint(rock, tone)
    trees = sorted(rng.uniform(-60, xs.max() - 20, 11))
    for x in trees:
        col = int(np.clip(x + shore_l.off_x, 0, len(ground) - 1))
        hgt = rng.uniform(70, 140)
        base = ground[col] + 6
        dark = conifer(shore_l.mask(), x, base, hgt, hgt * 0.42).get()
        shore_l.paint(dark, rgb(28, 60, 38))
        # Sunlit right flank: the same tree clipped to its right half, lighter.
        lit = dark * smoothstep(x - 2, x + hgt * 0.12, shore_l.xs)
        shore_l.paint(lit * 0.8, rgb(66, 110, 58))
    layers.append(shore_l)

    near = Layer(cam, 1.35)
    tree = conifer(near.mask(), 600, H + 30, 330, 150, 6).get()
    near.paint(tree, rgb(20, 44, 30))
    near.paint(tree * smoothstep(598, 640, near.xs) * 0.7, rgb(48, 84, 46))
    layers.append(near)
    return layers, cam


# --------------------------------------------------------------------------- shot 2


def house(
    layer: Layer,
    rng: np.random.Generator,
    x0: float,
    width: float,
    quay: float,
    windows: Mask,
    lit_glow: Mask,
) -> None:
    """One town house on the quay: walls, roof, chimney, a door and a grid of windows."""
    wall_h = rng.uniform(50, 110)
    top = quay - wall_h
    wall = (
        np.array(
            [[92, 78, 112], [112, 84, 82], [72, 88, 116], [104, 98, 90], [86, 70, 96]], np.float32
        )[rng.integers(5)]
        / 255.0
        * 0.75
    )
    layer.paint(
        layer.mask().rect(x0, top, x0 + width, quay).get(),
        vertical_gradient(layer, top, quay, wall * 1.15, wall * 0.7),
    )
    # Moonlight from the left: a thin lit edge on the left wall.
    layer.paint(layer.mask().rect(x0, top, x0 + 2.5, quay).get(), wall * 1.45)
    roof_h = rng.uniform(14, 34)
    m = layer.mask()
    if rng.random() < 0.75:
        m.poly([(x0 - 3, top), (x0 + width / 2, top - roof_h), (x0 + width + 3, top)])
    else:
        m.rect(x0 - 2, top - 6, x0 + width + 2, top)
    cx = x0 + width * rng.uniform(0.2, 0.8)
    m.rect(cx - 3, top - roof_h * 0.9, cx + 3, top)
    layer.paint(m.get(), rgb(42, 30, 42))
    cols = max(1, int((width - 8) // 16))
    rows = max(1, int((wall_h - 22) // 22))
    win_x = np.linspace(x0 + 4.5, x0 + width - 11.5, cols) if cols > 1 else [x0 + width / 2 - 3.5]
    for r in range(rows):
        wy = top + 8 + r * 22
        for wx in win_x:
            target = lit_glow if rng.random() < 0.55 else windows
            target.rect(wx, wy, wx + 7, wy + 10)
    dx = x0 + width * rng.uniform(0.2, 0.7)
    windows.rect(dx, quay - 16, dx + 8, quay)


def shot2(rng: np.random.Generator) -> tuple[list[Layer], Camera]:
    t = np.arange(SHOT2_FRAMES, dtype=np.float64)
    cam = Camera(pan_x=-5.0 * t, pan_y=0.25 * t, zoom=1.05 - 0.0024 * t)
    layers = []

    sky = Layer(cam, 0.04)
    field = vertical_gradient(sky, -40, 215, rgb(8, 12, 36), rgb(64, 48, 96), 1.6).copy()
    field += (
        smoothstep(120, 215, sky.ys)[..., None]
        * rgb(60, 24, 10)
        * smoothstep(500, 0, sky.xs)[..., None]
    )
    moon = (150.0, 66.0)
    field += glow(sky, moon, 45)[..., None] * rgb(70, 70, 80) * 0.7
    sky.paint(np.ones(sky.shape, np.float32), np.clip(field, 0, 1))
    stars = sky.mask()
    for x, y in zip(rng.uniform(-30, sky.xs.max(), 90), rng.uniform(-30, 170, 90)):
        stars.circle((x, y), rng.uniform(0.6, 1.4))
    sky.paint(stars.get() * smoothstep(180, 80, sky.ys), rgb(230, 232, 255))
    sky.paint(sky.mask().circle(moon, 14).get(), rgb(240, 236, 214))
    craters = (
        sky.mask().circle((moon[0] - 4, moon[1] - 3), 4).circle((moon[0] + 5, moon[1] + 4), 3).get()
    )
    sky.paint(craters * 0.35, rgb(170, 164, 150))
    layers.append(sky)

    hills = Layer(cam, 0.15)
    xs = hills.xs[0].astype(np.float64)
    ridge = 200 - 28 * np.abs(noise_1d(rng, xs, 220, 5)) - 10
    hills.paint(
        ridge_fill(hills, ridge),
        vertical_gradient(hills, 160, 240, rgb(36, 34, 66), rgb(22, 22, 44)),
    )
    lights = hills.mask()
    for x in rng.uniform(-20, xs.max(), 14):
        col = int(np.clip(x + hills.off_x, 0, len(ridge) - 1))
        lights.circle((x, ridge[col] + rng.uniform(6, 30)), 1.1)
    hills.paint(lights.get(), rgb(255, 206, 130))
    layers.append(hills)

    # Town on the quay, with its reflection in the harbour water (same depth).
    town = Layer(cam, 0.5)
    quay = 246.0
    windows, lit = town.mask(), town.mask()
    x = -town.off_x + 4
    while x < town.xs.max() - 40:
        width = rng.uniform(40, 82)
        house(town, rng, x, width, quay, windows, lit)
        x += width + rng.uniform(-4, 6)
    tower_x = 260.0
    tower = town.mask().rect(tower_x, quay - 150, tower_x + 26, quay)
    tower.poly([(tower_x - 3, quay - 150), (tower_x + 13, quay - 196), (tower_x + 29, quay - 150)])
    town.paint(
        tower.get(), vertical_gradient(town, quay - 196, quay, rgb(96, 90, 120), rgb(50, 46, 66))
    )
    lit.circle((tower_x + 13, quay - 128), 6)
    town.paint(windows.get(), rgb(28, 30, 52))
    lit_mask = lit.get()
    town.paint(lit_mask, rgb(255, 204, 112))
    halo = cv2.GaussianBlur(lit_mask, (0, 0), 6) * 0.4
    town.rgba[..., :3] += (
        halo[..., None] * rgb(255, 170, 80) * town.rgba[..., 3:]
    )  # window light on walls
    wall = town.mask().rect(-town.off_x, quay, town.xs.max(), quay + 12).get()
    town.paint(wall, vertical_gradient(town, quay, quay + 12, rgb(78, 74, 92), rgb(38, 36, 50)))

    # Water: gradient plus the town mirrored about the quay, rippled and dimmed.
    q_row = int(round(quay + 12 + town.off_y))
    h, w = town.shape
    above = town.rgba[max(0, 2 * q_row - h) : q_row, :, :3][::-1]
    mirror = np.zeros((h, w, 3), np.float32)
    mirror[q_row : q_row + len(above)] = above
    wob = noise_2d(rng, h, w, 2.5, 40, 2) * 5.0
    mx = (np.arange(w, dtype=np.float32)[None, :] + wob).astype(np.float32)
    my = np.broadcast_to(np.arange(h, dtype=np.float32)[:, None], (h, w)).astype(np.float32)
    mirror = cv2.remap(mirror, mx, my, cv2.INTER_LINEAR, borderMode=cv2.BORDER_REPLICATE)
    water = vertical_gradient(town, quay + 12, H + 30, rgb(34, 38, 78), rgb(10, 14, 36), 0.7).copy()
    dist = np.clip((town.ys - quay - 12) / 90, 0, 1)[..., None]
    water = water + mirror * 0.5 * (1 - 0.6 * dist)
    sparkle = smoothstep(1.1, 1.7, noise_2d(rng, h, w, 2, 30, 2))[..., None]
    moon_col = smoothstep(22, 0, np.abs(town.xs - 200))[..., None]
    water += sparkle * (0.08 + 0.5 * moon_col) * rgb(220, 216, 200)
    water_mask = ridge_fill(town, np.full(w, quay + 12))
    town.paint(water_mask, np.clip(water, 0, 1))
    layers.append(town)

    boat = Layer(cam, 0.5, velocity=(9.0, 0.0))  # overtakes the lamp post of the jetty
    bx, wl = 120.0, 300.0
    hull = (
        boat.mask()
        .poly([(bx - 48, wl - 16), (bx + 52, wl - 18), (bx + 40, wl + 2), (bx - 40, wl + 2)])
        .get()
    )
    boat.paint(hull, vertical_gradient(boat, wl - 18, wl + 2, rgb(150, 54, 44), rgb(70, 24, 24)))
    boat.paint(
        boat.mask().line([(bx - 48, wl - 16), (bx + 52, wl - 18)], 2).get(), rgb(200, 190, 170)
    )
    cabin = boat.mask().rect(bx - 20, wl - 36, bx + 14, wl - 16).get()
    boat.paint(
        cabin, vertical_gradient(boat, wl - 36, wl - 16, rgb(150, 146, 140), rgb(90, 88, 90))
    )
    boat.paint(
        boat.mask()
        .rect(bx - 14, wl - 31, bx - 4, wl - 23)
        .rect(bx + 1, wl - 31, bx + 9, wl - 23)
        .get(),
        rgb(255, 206, 120),
    )
    boat.paint(
        boat.mask().line([(bx + 24, wl - 18), (bx + 24, wl - 86)], 2).get(), rgb(120, 110, 100)
    )
    lamp = glow(boat, (bx + 24, wl - 88), 5)
    boat.paint(np.clip(lamp * 1.4, 0, 1), rgb(255, 230, 170))
    shadow = boat.mask().ellipse((bx, wl + 6), (46, 5)).get()
    boat.paint(cv2.GaussianBlur(shadow, (0, 0), 2) * 0.5, rgb(8, 8, 20))
    layers.append(boat)

    # Foreground jetty with a lamp post.
    pier = Layer(cam, 1.0)
    deck_top, deck_end = 318.0, 250.0
    m = pier.mask().poly(
        [
            (-pier.off_x, deck_top),
            (deck_end, deck_top + 4),
            (deck_end, deck_top + 14),
            (-pier.off_x, deck_top + 12),
        ]
    )
    for px in np.arange(-pier.off_x + 10, deck_end, 46):
        m.rect(px, deck_top + 8, px + 9, H + 40)
    pier.paint(m.get(), vertical_gradient(pier, deck_top, H + 30, rgb(92, 66, 52), rgb(30, 22, 22)))
    planks = pier.mask()
    for px in np.arange(-pier.off_x + 20, deck_end, 23):
        planks.line([(px, deck_top + 1), (px + 1, deck_top + 13)], 1)
    pier.paint(planks.get() * 0.8, rgb(36, 26, 22))
    lamp_x = 200.0
    pier.paint(
        pier.mask().rect(lamp_x - 2.5, 196, lamp_x + 2.5, deck_top + 4).get(), rgb(30, 30, 36)
    )
    halo = glow(pier, (lamp_x, 190), 38) * 0.5
    pier.paint(halo, rgb(255, 196, 120))
    pier.paint(pier.mask().circle((lamp_x, 190), 6).get(), rgb(255, 240, 200))
    pier.paint(
        pier.mask()
        .ellipse((60, deck_top - 6), (9, 8))
        .rect(51, deck_top - 6, 69, deck_top + 3)
        .get(),
        rgb(46, 44, 52),
    )
    layers.append(pier)
    return layers, cam


# --------------------------------------------------------------------------- style images

PALETTE = {
    "ultramarine": rgb(28, 38, 150),
    "deep": rgb(16, 20, 82),
    "sky": rgb(92, 122, 206),
    "orange": rgb(238, 118, 28),
    "yellow": rgb(250, 226, 58),
    "viridian": rgb(26, 128, 98),
    "white": rgb(242, 236, 218),
}
OUTLINE = rgb(22, 20, 44)


def _poly(img: np.ndarray, pts: np.ndarray, value, thickness: float, aa: bool = True) -> None:
    ipts = np.round(pts * 16).astype(np.int32)  # 4 fractional bits
    val = tuple(float(v) for v in np.atleast_1d(value))
    cv2.polylines(
        img, [ipts], False, val, max(1, int(round(thickness))), cv2.LINE_AA if aa else cv2.LINE_8, 4
    )


def brush_stroke(
    canvas: np.ndarray,
    height: np.ndarray,
    pts: np.ndarray,
    width: float,
    colour: np.ndarray,
    outline: bool,
    rng: np.random.Generator,
) -> None:
    """One loaded-brush stroke along ``pts``: a solid body, then bristle streaks across it.

    Bristles differ slightly in tone, stop early at random (dry brush) and leave ridges in
    the paint ``height`` map; the colour lightens along the stroke as the paint thins.
    """
    if len(pts) < 3:
        return
    tangent = np.gradient(pts, axis=0)
    normal = np.stack([-tangent[:, 1], tangent[:, 0]], 1)
    normal /= np.linalg.norm(normal, axis=1, keepdims=True) + 1e-6
    taper = np.sin(np.linspace(0.2, np.pi - 0.2, len(pts))) ** 0.5
    if outline:
        _poly(canvas, pts, OUTLINE * 255, width + 3)
    _poly(canvas, pts, np.clip(colour, 0, 1) * 255, width * 0.8)
    _poly(height, pts, 0.5, width * 0.8, aa=False)
    bristles = max(3, int(width / 1.6))
    thick = width / bristles * 1.2
    for off in np.linspace(-0.5, 0.5, bristles):
        keep = len(pts) - rng.integers(0, len(pts) // 3 + 1)
        bp = pts[:keep] + (off * width * taper[:keep])[:, None] * normal[:keep]
        tone = colour * (1 + rng.normal(0, 0.1)) * (1 + 0.12 * off)
        half = keep // 2 + 1
        for seg, gain in ((bp[:half], 1.0), (bp[half - 1 :], 1.08)):
            if len(seg) >= 2:
                _poly(canvas, seg, np.clip(tone * gain, 0, 1) * 255, thick)
                _poly(height, seg, rng.uniform(0.6, 1.0), thick * 0.7, aa=False)


def painting(rng: np.random.Generator, n: int = STYLE_SIZE) -> np.ndarray:
    """An original "thick paint" picture: swirling sky, a blazing sun, rolling hills.

    Strokes follow a flow field (streamlines of a stream function with a few vortices in the
    sky, circles around the sun, hill contours below) and are drawn bristle by bristle with
    colour varying along and across the stroke; a height map of the paint gives impasto relief.
    """
    ys, xs = np.mgrid[0:n, 0:n].astype(np.float32)
    horizon = 330 + 22 * np.sin(xs[0] / 80.0) + 18 * noise_1d(rng, xs[0].astype(np.float64), 200, 3)
    sun_c, sun_r = np.array([360.0, 140.0]), 60.0
    d_sun = np.hypot(xs - sun_c[0], ys - sun_c[1])
    below = ys > horizon[None, :]

    psi = 0.35 * ys
    for cx, cy, a, s in (
        (120, 120, 60, 60),
        (230, 250, -45, 50),
        (60, 270, 35, 40),
        (470, 300, -30, 45),
    ):
        psi += a * np.exp(-((xs - cx) ** 2 + (ys - cy) ** 2) / (2 * s**2))
    psi += 6 * noise_2d(rng, n, n, 90, 90, 2)
    gy, gx = np.gradient(psi)
    ang = np.arctan2(-gx, gy)  # streamlines run perpendicular to grad(psi)
    ang = np.where(d_sun < sun_r + 40, np.arctan2(ys - sun_c[1], xs - sun_c[0]) + np.pi / 2, ang)
    hill_slope = np.gradient(horizon)[None, :] * np.exp(-(ys - horizon[None, :]) / 120)
    hill_ang = np.arctan(hill_slope) + 0.25 * noise_2d(rng, n, n, 60, 60, 2)
    ang = np.where(below, hill_ang, ang).astype(np.float32)
    dir_x, dir_y = np.cos(ang), np.sin(ang)

    band = np.floor((ys - horizon[None, :]) / 42 + 0.6 * noise_2d(rng, n, n, 80, 80, 2))
    sky_q = (psi / 14.0) % 3

    def colour_at(x: int, y: int) -> np.ndarray:
        r = rng.random()
        if d_sun[y, x] < sun_r:
            c = (
                PALETTE["white"]
                if r < 0.18
                else PALETTE["yellow"] if r < 0.85 else PALETTE["orange"]
            )
        elif d_sun[y, x] < sun_r + 40:
            ring = int((d_sun[y, x] - sun_r) // 13) % 2
            c = PALETTE["orange"] if (ring == 0) != (r < 0.2) else PALETTE["yellow"]
        elif below[y, x]:
            k = int(band[y, x]) % 3
            c = (
                PALETTE["viridian"],
                PALETTE["deep"],
                PALETTE["viridian"] * 0.6 + PALETTE["yellow"] * 0.4,
            )[k]
            if r < 0.1:
                c = PALETTE["orange"]
        else:
            k = int(sky_q[y, x])
            c = (
                PALETTE["ultramarine"],
                PALETTE["sky"],
                PALETTE["white"] * 0.8 + PALETTE["sky"] * 0.2,
            )[k]
            if horizon[x] - y < 40 and r < 0.4:
                c = PALETTE["orange"] * 0.7 + PALETTE["white"] * 0.3
            elif r < 0.08:
                c = PALETTE["deep"]
        return c * rng.uniform(0.9, 1.08)

    canvas = np.zeros((n, n, 3), np.uint8)
    height = np.zeros((n, n), np.float32)
    base = np.where(below[..., None], PALETTE["viridian"] * 0.8, PALETTE["ultramarine"])
    base = np.where((d_sun < sun_r + 40)[..., None], PALETTE["orange"], base)
    canvas[:] = np.round(np.clip(cv2.GaussianBlur(base, (0, 0), 8), 0, 1) * 255)

    def trace(seeds: np.ndarray, steps: int, step: float) -> np.ndarray:
        """Integrate streamlines both ways from the seeds; returns (N, 2*steps+1, 2)."""
        out = [seeds]
        for sign in (1.0, -1.0):
            p = seeds.copy()
            prev = None
            path = []
            for _ in range(steps):
                ix = np.clip(p[:, 0].astype(int), 0, n - 1)
                iy = np.clip(p[:, 1].astype(int), 0, n - 1)
                d = np.stack([dir_x[iy, ix], dir_y[iy, ix]], 1) * sign
                if prev is not None:  # the field is a line field: keep heading the same way
                    d *= np.where((d * prev).sum(1) < 0, -1.0, 1.0)[:, None]
                p = p + d * step
                prev = d
                path.append(p)
            out = (path[::-1] + out) if sign < 0 else (out + path)
        return np.stack(out, 1)

    for count, width, steps, step, outline_p in (
        (420, (13, 22), 18, 3.0, 0.0),
        (1000, (8, 13), 13, 2.8, 0.12),
        (700, (4, 7), 8, 2.4, 0.06),
    ):
        seeds = rng.uniform(0, n, (count, 2))
        for seed, path in zip(seeds.astype(int), trace(seeds, steps, step)):
            length = rng.integers(len(path) * 2 // 3, len(path) + 1)
            start = rng.integers(0, len(path) - length + 1)
            brush_stroke(
                canvas,
                height,
                path[start : start + length],
                rng.uniform(*width),
                colour_at(*np.clip(seed, 0, n - 1)),
                rng.random() < outline_p,
                rng,
            )

    # Impasto relief lit from the upper left: surface normal ~ (-dh/dx, -dh/dy, 1).
    relief = cv2.GaussianBlur(height, (0, 0), 0.8)
    gy, gx = np.gradient(relief)
    shade = 1 + 0.8 * (gx + gy)
    out = canvas.astype(np.float32) / 255.0 * shade[..., None]
    out += np.clip(shade - 1.2, 0, None)[..., None] * 0.5  # glints on the paint ridges
    return np.clip(out, 0, 1)


def woodcut(rng: np.random.Generator, n: int = STYLE_SIZE) -> np.ndarray:
    """An original two-colour print: sun with rays over hills and waves, engraved in lines.

    Tone is rendered by line width (thick lines = dark), lines follow each region's form, and
    region boundaries are cut as bold outlines. Drawn at 2x and area-averaged down.
    """
    s = 2 * n
    ys, xs = np.mgrid[0:s, 0:s].astype(np.float32)
    wobble = 3.0 * noise_2d(rng, s, s, 40, 40, 2)
    sun_c, sun_r = (640.0, 360.0), 150.0
    d = np.hypot(xs - sun_c[0], ys - sun_c[1])
    theta = np.arctan2(ys - sun_c[1], xs - sun_c[0])
    ridge1 = (
        560
        - 120 * np.exp(-(((xs[0] - 260) / 230) ** 2))
        - 40 * noise_1d(rng, xs[0].astype(np.float64), 300, 3)
    )
    ridge2 = (
        690
        - 90 * np.exp(-(((xs[0] - 800) / 260) ** 2))
        - 30 * noise_1d(rng, xs[0].astype(np.float64), 250, 3)
    )
    water_y = 800 + 10 * np.sin(xs[0] / 70)

    region = np.zeros((s, s), np.uint8)  # 0 sky, 1 sun, 2 far hill, 3 near hill, 4 water
    region[d < sun_r] = 1
    region[ys > ridge1[None, :]] = 2
    region[ys > ridge2[None, :]] = 3
    region[ys > water_y[None, :]] = 4

    def lines(phase: np.ndarray, spacing: float, dark) -> np.ndarray:
        f = ((phase + wobble) / spacing) % 1.0
        dist = np.abs(f - 0.5) * 2  # 0 on a line's centre, 1 between lines
        return (dist < np.clip(dark, 0, 1)).astype(np.float32)

    ray = (np.floor((theta + np.pi) / (np.pi / 12)) % 2).astype(np.float32)
    sky_dark = np.where(ray > 0, 0.55, 0.12) * smoothstep(sun_r, sun_r + 500, d) + 0.1
    ink = np.zeros((s, s), np.float32)
    ink = np.where(region == 0, lines(d, 16, sky_dark), ink)
    ink = np.where(region == 1, lines(d, 22, 0.35), ink)
    h1 = (ys - ridge1[None, :]) / 140
    ink = np.where(region == 2, lines(ys - 0.6 * ridge1[None, :], 14, 0.2 + 0.6 * h1), ink)
    h2 = (ys - ridge2[None, :]) / 110
    cross = lines(xs + 0.8 * ys, 12, np.clip(h2 - 0.6, 0, 1) * 0.8)
    ink = np.where(
        region == 3, np.maximum(lines(ys - 0.5 * ridge2[None, :], 12, 0.3 + 0.45 * h2), cross), ink
    )
    wave = ys + 14 * np.sin(xs / 45 + ys / 30)
    crest = (np.floor(wave / 60) % 2).astype(np.float32)
    ink = np.where(region == 4, lines(wave, 15, 0.25 + 0.5 * crest), ink)

    edges = cv2.morphologyEx(region, cv2.MORPH_GRADIENT, np.ones((7, 7), np.uint8)) > 0
    ink = np.maximum(ink, edges.astype(np.float32))
    border = (xs < 28) | (xs > s - 29) | (ys < 28) | (ys > s - 29)
    ink[border] = 1.0

    paper, black, red = rgb(238, 228, 204), rgb(30, 24, 26), rgb(206, 62, 40)
    base = np.where((region == 1)[..., None], red, paper)
    img = base * (1 - ink[..., None]) + black * ink[..., None]
    return np.clip(cv2.resize(img.astype(np.float32), (n, n), interpolation=cv2.INTER_AREA), 0, 1)


# --------------------------------------------------------------------------- output


def write_png(path: Path, img_rgb: np.ndarray) -> None:
    if img_rgb.dtype != np.uint8:
        img_rgb = np.round(np.clip(img_rgb, 0, 1) * 255).astype(np.uint8)
    params = [
        cv2.IMWRITE_PNG_COMPRESSION,
        9,
        cv2.IMWRITE_PNG_STRATEGY,
        cv2.IMWRITE_PNG_STRATEGY_FILTERED,
    ]
    ok, buf = cv2.imencode(".png", cv2.cvtColor(img_rgb, cv2.COLOR_RGB2BGR), params)
    if not ok:
        raise RuntimeError(f"PNG encoding failed for {path}")
    write_bytes(path, buf.tobytes())


def generate(out_dir: Path) -> list[Path]:
    """Write the frames and both style images under ``out_dir``; returns the paths written."""
    rng = np.random.default_rng(SEED)
    written = []
    frame = 1
    for make in (shot1, shot2):
        layers, cam = make(rng)
        for t in range(len(cam.pan_x)):
            path = out_dir / "frames" / f"drift_{frame:04d}.png"
            write_png(path, render(layers, cam, t))
            written.append(path)
            frame += 1
    for name, make_style, seed in (
        ("style.png", painting, SEED + 1),
        ("style_ink.png", woodcut, SEED + 2),
    ):
        write_png(out_dir / name, make_style(np.random.default_rng(seed)))
        written.append(out_dir / name)
    return written


def main(argv: list[str] | None = None) -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument(
        "--out",
        type=Path,
        default=Path(__file__).resolve().parent,
        help="folder to write frames/ and the style images into (default: beside this script)",
    )
    args = parser.parse_args(argv)
    paths = generate(args.out)
    print(f"wrote {len(paths)} files under {args.out}")


if __name__ == "__main__":
    main()
