"""Shot 1 of the demo clip: a mountain lake in the afternoon.

The camera drifts right and pushes in slowly. Each depth layer (sky, far and middle ridges,
forested hills with the lake, the near shore, one close fir) is painted once; nearer layers
move and scale more (parallax), so near objects slide across far ones.
"""

from __future__ import annotations

import cv2
import numpy as np

from layers import H, Camera, Layer, Mask, glow, ridge_fill, vertical_gradient
from procedural import noise_1d, noise_2d, rgb, smoothstep

FRAMES = 28


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


def lake_shot(rng: np.random.Generator) -> tuple[list[Layer], Camera]:
    """The layers of shot 1, back to front, and its camera path."""
    t = np.arange(FRAMES, dtype=np.float64)
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
