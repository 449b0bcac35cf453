"""Shot 2 of the demo clip: a market street at midday.

From under the awning of a stall, the camera looks across a sunlit street at a row of shops
with striped awnings and crates of fruit; it pans left and pulls back while a striped ball
rolls from right to left along the paving and passes behind the stall's pole (occlusion).
The sun is high behind the camera and a little to the right, so the facades are lit and
awnings, cornices and lintels cast short shadows straight down.
"""

from __future__ import annotations

import cv2
import numpy as np

from layers import H, Camera, Layer, glow, ridge_fill, vertical_gradient
from procedural import noise_1d, noise_2d, rgb, smoothstep

FRAMES = 20
GROUND = 288.0  # foot of the shopfronts across the street (rest-frame px)
STOREY = 54.0  # height of an upper floor

SKY_TOP, SKY_LOW = rgb(96, 152, 218), rgb(206, 224, 236)
WALLS = [rgb(222, 172, 96), rgb(204, 116, 76), rgb(238, 222, 188), rgb(228, 172, 150),
         rgb(178, 182, 132), rgb(214, 196, 150)]
SHUTTERS = [rgb(64, 120, 96), rgb(70, 112, 150), rgb(128, 84, 54)]
AWNINGS = [(rgb(196, 52, 44), rgb(240, 232, 214)), (rgb(30, 120, 110), rgb(240, 232, 214)),
           (rgb(230, 168, 40), rgb(250, 244, 230)), (rgb(52, 80, 150), rgb(236, 236, 230))]
FRUIT = [rgb(240, 138, 30), rgb(246, 214, 60), rgb(188, 40, 40), rgb(112, 162, 60)]
ROOF, STONE, SHADE = rgb(172, 86, 60), rgb(236, 228, 210), rgb(40, 32, 70)


def stripes(layer: Layer, x0: float, width: float, c0, c1) -> np.ndarray:
    """(h, w, 3) field of vertical stripes ``width`` wide, ``c0`` and ``c1`` in turn from ``x0``."""
    odd = (np.floor((layer.xs - x0) / width) % 2)[..., None]
    return np.broadcast_to(c0 * (1 - odd) + c1 * odd, layer.shape + (3,))


def shadow(layer: Layer, mask: np.ndarray, strength: float, soft: float = 1.5) -> None:
    """Darken the layer through a softened ``mask`` (shade is lit by the bluish sky)."""
    layer.paint(cv2.GaussianBlur(mask, (0, 0), soft) * strength, SHADE)


def awning(
    layer: Layer, x0: float, x1: float, top: float, skirt: float, colours, stripe: float
) -> float:
    """A striped awning seen from the front: canvas sloping from ``top`` down to ``skirt``,
    then a scalloped valance, one scallop per stripe. Returns the lowest row of the scallops.
    """
    n = max(1, int(round((x1 - x0) / stripe)))
    step = (x1 - x0) / n
    drop = 0.35 * step
    m = layer.mask().rect(x0, top, x1, skirt + drop)
    for k in range(n):
        m.ellipse((x0 + (k + 0.5) * step, skirt + drop), (step / 2, drop), arc=(0, 180))
    field = stripes(layer, x0, step, *colours)
    # The slope faces the high sun and is brightest; the valance hangs vertical, a little duller.
    light = np.where(layer.ys < skirt, 1.08 - 0.1 * smoothstep(top, skirt, layer.ys), 0.86)
    layer.paint(m.get(), np.clip(field * light[..., None], 0, 1))
    layer.paint(layer.mask().line([(x0, top), (x1, top)], 2).get(), rgb(70, 60, 56))
    return skirt + 2 * drop


def window(layer: Layer, rng: np.random.Generator, x: float, y: float, shutter) -> None:
    """A window centred on ``x`` with its top at ``y``: open shutters, glass, sill, flowers."""
    w, h = 20.0, 32.0
    a, b = x - w / 2, x + w / 2  # the glass spans a..b, a shutter opens out on either side
    layer.paint(layer.mask().rect(a - 11, y, a, y + h).rect(b, y, b + 11, y + h).get(), shutter)
    slats = layer.mask()
    for sy in np.arange(y + 5, y + h, 6):
        slats.line([(a - 10, sy), (a - 1, sy)], 1).line([(b + 1, sy), (b + 10, sy)], 1)
    layer.paint(slats.get() * 0.6, shutter * 0.6)
    glass = vertical_gradient(layer, y, y + h, rgb(36, 40, 54), rgb(84, 96, 112))
    layer.paint(layer.mask().rect(a, y, b, y + h).get(), glass)
    shadow(layer, layer.mask().rect(a - 11, y, b + 11, y + 5).get(), 0.5, 1.0)
    layer.paint(layer.mask().rect(a - 3, y + h, b + 3, y + h + 4).get(), STONE)
    if rng.random() < 0.3:  # a flower box on the sill
        layer.paint(layer.mask().rect(a, y + h - 7, b, y + h).get(), rgb(72, 110, 52))
        blooms = layer.mask()
        for fx in np.linspace(a + 3, b - 3, 4):
            blooms.circle((fx + rng.uniform(-1, 1), y + h - 8 + rng.uniform(-1, 1)), 2.6)
        layer.paint(blooms.get(), FRUIT[2] * 1.2)


def produce_stand(layer: Layer, rng: np.random.Generator, x0: float, x1: float) -> None:
    """A trestle table under the awning with crates of fruit heaped on it."""
    table = 262.0
    layer.paint(layer.mask().rect(x0, table, x1, table + 5).get(), rgb(150, 104, 62))
    legs = layer.mask().rect(x0 + 4, table, x0 + 8, GROUND).rect(x1 - 8, table, x1 - 4, GROUND)
    layer.paint(legs.get(), rgb(96, 66, 44))
    n = max(1, int((x1 - x0) // 34))
    width = (x1 - x0) / n
    for k in range(n):
        cx0, cx1 = x0 + k * width + 2, x0 + (k + 1) * width - 2
        crate = layer.mask().rect(cx0, table - 14, cx1, table).get()
        wood = vertical_gradient(layer, table - 14, table, rgb(190, 140, 84), rgb(138, 96, 56))
        layer.paint(crate, wood)
        heap, colour = layer.mask(), FRUIT[rng.integers(len(FRUIT))]
        for row, (dy, inset) in enumerate(((-16, 3.5), (-22, 8.0))):
            for fx in np.arange(cx0 + inset, cx1 - inset + 0.1, 7.0):
                heap.circle((fx + rng.uniform(-0.8, 0.8), table + dy + row), 4.2)
        fruit = heap.get()
        layer.paint(fruit, colour)
        sheen = glow(layer, ((cx0 + cx1) / 2 + 4, table - 26), 10)
        layer.paint(fruit * sheen * 0.5, rgb(255, 250, 230))


def shop(
    layer: Layer, rng: np.random.Generator, x0: float, width: float, plaster: np.ndarray
) -> None:
    """One house of the row: a roof, upper floors with windows, and a shop with an awning.

    ``plaster`` is an (h, w, 1) brightness field that keeps the walls from looking flat.
    """
    floors = int(rng.integers(1, 4))
    top = GROUND - 86 - floors * STOREY
    wall = WALLS[rng.integers(len(WALLS))]
    body = layer.mask().rect(x0, top, x0 + width, GROUND).get()
    colour = vertical_gradient(layer, top, GROUND, wall, wall * 0.92) * plaster
    layer.paint(body, np.clip(colour, 0, 1))
    eave = layer.mask().rect(x0 - 5, top - 16, x0 + width + 5, top)
    if rng.random() < 0.4:
        cx = x0 + width * rng.uniform(0.2, 0.8)
        eave.rect(cx - 6, top - 34, cx + 6, top - 10)
    layer.paint(eave.get(), vertical_gradient(layer, top - 16, top, ROOF * 0.8, ROOF * 1.1))
    tiles = layer.mask()
    for tx in np.arange(x0 - 3, x0 + width + 4, 7.0):
        tiles.line([(tx, top - 15), (tx, top)], 1)
    layer.paint(tiles.get() * 0.5, ROOF * 0.6)
    layer.paint(layer.mask().rect(x0 - 2, top, x0 + width + 2, top + 5).get(), STONE)  # cornice
    shadow(layer, layer.mask().rect(x0, top + 5, x0 + width, top + 12).get(), 0.45)
    shutter = SHUTTERS[rng.integers(len(SHUTTERS))]
    count = max(1, int(width // 48))
    for f in range(floors):
        for x in x0 + width * (np.arange(count) + 0.5) / count:
            window(layer, rng, x, top + 14 + f * STOREY, shutter)
    opening = layer.mask().rect(x0 + 10, 214, x0 + width - 10, GROUND).get()
    layer.paint(opening, vertical_gradient(layer, 214, GROUND, rgb(64, 48, 44), rgb(34, 26, 30)))
    produce_stand(layer, rng, x0 + 14, x0 + width - 14)
    colours = AWNINGS[rng.integers(len(AWNINGS))]
    low = awning(layer, x0 + 4, x0 + width - 4, 198, 224, colours, 12.0)
    shadow(layer, layer.mask().rect(x0, low, x0 + width, low + 10).get(), 0.35, 3.0)


def paving(layer: Layer, rng: np.random.Generator) -> None:
    """Stone slabs in courses that deepen towards the camera, with dark joints."""
    courses = GROUND + np.cumsum([0, 10, 12, 14, 16, 18, 20, 22, 24, 26])
    row = np.clip(np.searchsorted(courses, layer.ys[:, 0], side="right") - 1, 0, len(courses) - 2)
    depth = (courses[row + 1] - courses[row])[:, None]
    shift = rng.uniform(0, 60, len(courses))[row][:, None]
    slab_w = 2.4 * depth
    u = (layer.xs + shift) / slab_w
    slab = np.floor(u).astype(np.int64) * 31 + row[:, None] * 7
    tint = 1 + 0.06 * rng.standard_normal(4096)[slab % 4096]
    base = vertical_gradient(layer, GROUND, H + 30, rgb(204, 188, 160), rgb(172, 154, 130))
    to_joint = np.minimum(np.minimum(u % 1, 1 - u % 1) * slab_w, layer.ys - courses[row][:, None])
    joint = smoothstep(1.5, 0.0, to_joint)[..., None]
    colour = base * tint[..., None] * (1 - 0.4 * joint)
    layer.paint(ridge_fill(layer, np.full(layer.shape[1], GROUND)), np.clip(colour, 0, 1))


def market_shot(rng: np.random.Generator) -> tuple[list[Layer], Camera]:
    """The layers of shot 2, back to front, and its camera path."""
    t = np.arange(FRAMES, dtype=np.float64)
    # A gentle pull-back: zooming faster over this many sharp edges makes the colour
    # histogram wobble from frame to frame (measured), and the cut must stand far above that.
    cam = Camera(pan_x=-4.5 * t, pan_y=-0.1 * t, zoom=1.03 - 0.001 * t)
    layers = []

    sky = Layer(cam, 0.04)
    field = vertical_gradient(sky, -20, 150, SKY_TOP, SKY_LOW)
    haze = smoothstep(0.6, 1.6, noise_2d(rng, *sky.shape, 20, 120, 3))[..., None] * 0.35
    sky.paint(np.ones(sky.shape, np.float32), field * (1 - haze) + rgb(244, 246, 248) * haze)
    layers.append(sky)

    # Roofs of the next street, hazy with distance, and a square tower.
    back = Layer(cam, 0.3)
    xs = back.xs[0].astype(np.float64)
    steps = np.floor((xs - xs.min()) / 70)
    line = 70 + 14 * noise_1d(rng, steps * 70, 150, 2) + 4 * (steps % 2)
    haze_wall = WALLS[3] * 0.55 + SKY_LOW * 0.45
    fill = np.clip(back.ys - line[None, :] + 0.5, 0, 1) * (back.ys < 220)
    back.paint(fill, vertical_gradient(back, 50, 200, haze_wall, 0.9 * haze_wall))
    roof_band = np.clip(back.ys - line[None, :] + 0.5, 0, 1) * (back.ys < line[None, :] + 9)
    back.paint(roof_band, ROOF * 0.65 + SKY_LOW * 0.35)
    tower = back.mask().rect(380, 14, 414, 220).poly([(376, 14), (397, -16), (418, 14)])
    hazy_roof = ROOF * 0.7 + SKY_LOW * 0.3
    back.paint(tower.get(), vertical_gradient(back, -16, 200, hazy_roof, haze_wall))
    back.paint(back.mask().rect(390, 30, 404, 48).get(), rgb(120, 110, 120))
    layers.append(back)

    street = Layer(cam, 0.6)
    plaster = 1 + 0.05 * noise_2d(rng, *street.shape, 60, 60, 2)[..., None]
    x = float(street.xs.min()) + 2
    while x < street.xs.max() - 20:
        width = rng.uniform(96, 170)
        shop(street, rng, x, width, plaster)
        x += width
    paving(street, rng)
    layers.append(street)

    # The ball rolls left (spin = velocity / radius) and is lit from above; its shadow and
    # shading move with it but do not turn.
    speed, r, bx, by = -18.0, 26.0, 400.0, 300.0
    cast = Layer(cam, 0.85, velocity=(speed, 0.0))
    shadow(cast, cast.mask().ellipse((bx - 4, by + r - 2), (r, 5)).get(), 0.5, 2.0)
    ball = Layer(cam, 0.85, velocity=(speed, 0.0), spin=speed / r, pivot=(bx, by))
    for k, colour in enumerate((FRUIT[2], STONE, FRUIT[1], STONE, rgb(40, 80, 170), STONE)):
        ball.paint(ball.mask().ellipse((bx, by), (r, r), arc=(60 * k, 60 * (k + 1))).get(), colour)
    ball.paint(ball.mask().circle((bx, by), 5).get(), STONE)
    shading = Layer(cam, 0.85, velocity=(speed, 0.0))
    disc = shading.mask().circle((bx, by), r).get()
    nx, ny = (shading.xs - bx) / r, (shading.ys - by) / r
    nz = np.sqrt(np.clip(1 - nx**2 - ny**2, 0, 1))
    lambert = np.clip(0.3 * nx - 0.55 * ny + 0.78 * nz, 0, 1)  # light from above, right, front
    shading.paint(disc * 0.6 * (1 - lambert), SHADE * 0.5)
    shading.paint(disc * glow(shading, (bx + 7, by - 11), 5) * 0.7, rgb(255, 255, 255))
    layers += [cast, ball, shading]

    # Foreground: the near stall's awning along the top and its pole, and the kerb below.
    near = Layer(cam, 1.2)
    kerb = near.mask().rect(float(near.xs.min()), 340, float(near.xs.max()), H + 80).get()
    near.paint(kerb, vertical_gradient(near, 340, 352, STONE * 0.95, STONE * 0.62))
    near.paint(near.mask().rect(float(near.xs.min()), 340, float(near.xs.max()), 343).get(), STONE)
    pole_x = 196.0
    pole = near.mask().rect(pole_x - 6, -40, pole_x + 6, 346).get()
    metal = np.where(near.xs > pole_x + 1, 1.5, 1.0)[..., None] * rgb(40, 72, 58)
    near.paint(pole, np.broadcast_to(metal, near.shape + (3,)))
    near.paint(near.mask().ellipse((pole_x, 344), (11, 4)).get(), rgb(30, 50, 42))
    in_shade = (rgb(52, 112, 84) * 0.72, rgb(214, 206, 176) * 0.72)  # seen from beneath
    awning(near, float(near.xs.min()), float(near.xs.max()), -60, 14, in_shade, 30.0)
    layers.append(near)
    return layers, cam
