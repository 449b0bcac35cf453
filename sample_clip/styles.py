"""The bundled style images: a cut-paper collage, an ink cross-hatch drawing and a mosaic.

Each is an original design drawn at twice its size and area-averaged down, with bold shapes
and clear edges so that stylising footage with it visibly changes the footage.
"""

from __future__ import annotations

import cv2
import numpy as np

from procedural import noise_1d, noise_2d, rgb, smoothstep

SIZE = 512
S = 2 * SIZE  # drawing size


def _downsample(img: np.ndarray) -> np.ndarray:
    small = cv2.resize(img.astype(np.float32), (SIZE, SIZE), interpolation=cv2.INTER_AREA)
    return np.clip(small, 0, 1)


def _fill(pts) -> np.ndarray:
    """Anti-aliased (S, S) float mask of a closed polygon (4 fractional bits)."""
    img = np.zeros((S, S), np.uint8)
    ipts = np.round(np.asarray(pts, np.float64) * 16).astype(np.int32)
    cv2.fillPoly(img, [ipts], 255, cv2.LINE_AA, shift=4)
    return img.astype(np.float32) / 255.0


# --------------------------------------------------------------------------- collage


def _outline(kind: str, cx: float, cy: float, a: float, b: float, angle: float) -> np.ndarray:
    """Closed outline (N, 2) of a ``rect``, ``tri``, ``disc``, ``half`` disc or ``arch``
    with half sizes ``a`` by ``b``, turned ``angle`` degrees about its centre."""
    upper = np.linspace(np.pi, 2 * np.pi, 48)  # the upper half of an ellipse (y points down)
    arc = np.stack([a * np.cos(upper), b * np.sin(upper)], 1)
    round_ = np.linspace(0, 2 * np.pi, 96, endpoint=False)
    pts = {
        "rect": np.array([(-a, -b), (a, -b), (a, b), (-a, b)]),
        "tri": np.array([(-a, b), (a, b), (0.3 * a, -b)]),
        "disc": np.stack([a * np.cos(round_), b * np.sin(round_)], 1),
        "half": arc,
        "arch": np.vstack([[(-a, 2 * b)], arc, [(a, 2 * b)]]),
    }[kind]
    c, s = np.cos(np.radians(angle)), np.sin(np.radians(angle))
    return pts @ np.array([[c, s], [-s, c]]) + (cx, cy)


def _tear(rng: np.random.Generator, pts: np.ndarray, amp: float, grow: float = 0.0) -> np.ndarray:
    """A torn edge: the closed outline resampled every 3 px, moved ``grow`` px outwards and
    pushed randomly in and out by about ``amp`` px."""
    closed = np.vstack([pts, pts[:1]])
    seg = np.hypot(*np.diff(closed, axis=0).T)
    cum = np.concatenate([[0], np.cumsum(seg)])
    at = np.linspace(0, cum[-1], max(8, int(cum[-1] / 3)), endpoint=False)
    dense = np.stack([np.interp(at, cum, closed[:, k]) for k in (0, 1)], 1)
    tangent = np.roll(dense, -1, 0) - np.roll(dense, 1, 0)
    normal = np.stack([tangent[:, 1], -tangent[:, 0]], 1)
    normal /= np.linalg.norm(normal, axis=1, keepdims=True) + 1e-9
    area = np.sum(closed[:-1, 0] * closed[1:, 1] - closed[1:, 0] * closed[:-1, 1])
    normal *= np.sign(area)  # outwards whichever way the outline winds
    wander = grow + amp * (noise_1d(rng, at, 60, 3) + 0.6 * rng.standard_normal(len(at)))
    return dense + normal * wander[:, None]


def collage(rng: np.random.Generator) -> np.ndarray:
    """Cut and torn paper: a few flat colours on a cream sheet, with grain and drop shadows.

    Torn pieces have ragged edges with the paper's pale core showing along them; cut
    pieces have clean edges. Each piece throws a soft shadow to the lower right.
    """
    cream, navy, teal = rgb(242, 232, 208), rgb(34, 46, 86), rgb(22, 128, 122)
    coral, mustard, blush = rgb(234, 96, 70), rgb(232, 176, 46), rgb(240, 186, 168)
    charcoal, core = rgb(44, 40, 42), rgb(252, 250, 242)
    pieces = [  # (shape, centre x, y, half sizes, angle, colour, torn), back to front
        ("rect", 760, 230, 420, 270, 7, teal, True),
        ("rect", 300, 820, 460, 250, -8, navy, True),
        ("arch", 210, 330, 150, 170, -4, blush, False),
        ("disc", 640, 560, 215, 215, 0, coral, False),
        ("rect", 520, 430, 560, 52, -14, mustard, True),
        *[("rect", 300, y, 260, 4, -14, charcoal, False) for y in (680, 710, 740)],
        ("half", 330, 900, 170, 170, 0, cream, False),
        ("tri", 880, 840, 150, 170, 12, mustard, False),
        ("disc", 860, 560, 80, 80, 0, navy, False),
    ]
    for _ in range(14):  # scraps and confetti
        kind = ("disc", "rect", "tri")[rng.integers(3)]
        a = rng.uniform(14, 46)
        cx, cy = rng.uniform(40, S - 40, 2)
        colour = (navy, teal, coral, mustard, blush, charcoal, cream)[rng.integers(7)]
        b, angle, torn = a * rng.uniform(0.4, 1.0), rng.uniform(0, 180), rng.random() < 0.5
        pieces.append((kind, cx, cy, a, b, angle, colour, torn))

    mottle = 1 + 0.035 * noise_2d(rng, S, S, 90, 90, 2)[..., None]  # uneven dye in the paper
    canvas = np.broadcast_to(cream, (S, S, 3)) * mottle
    for kind, cx, cy, a, b, angle, colour, torn in pieces:
        pts = _outline(kind, cx, cy, a, b, angle)
        if torn:
            body = _fill(_tear(rng, pts, 3.0))
            paper = np.maximum(body, _fill(_tear(rng, pts, 3.0, grow=4.0)))
        else:
            body = paper = _fill(pts)
        drop = cv2.GaussianBlur(np.roll(paper, (9, 7), (0, 1)), (0, 0), 5)
        canvas = canvas * (1 - 0.32 * drop[..., None])
        canvas = canvas * (1 - paper[..., None]) + core * paper[..., None]
        canvas = canvas * (1 - body[..., None]) + colour * mottle * body[..., None]
    grain = rng.standard_normal((2, S, S)).astype(np.float32)
    fibres = cv2.GaussianBlur(grain[0], (0, 0), 2.0)
    fibres += 0.5 * cv2.GaussianBlur(grain[1], (0, 0), sigmaX=6, sigmaY=0.8)  # along the sheet
    return _downsample(canvas * (1 + 0.06 * fibres[..., None]))


# --------------------------------------------------------------------------- ink drawing


def _still_life(xs: np.ndarray, ys: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Tone (1 = paper white), first hatch phase and region label of a ball, a jar and a
    block on a table, lit by one light from the upper right (Lambert shading)."""
    light = np.array([0.55, -0.6, 0.58]) / np.linalg.norm([0.55, -0.6, 0.58])
    top, front = 660.0, 850.0  # the table's back edge and front edge
    parts = [  # (coverage, tone, phase) in painter's order
        (np.ones_like(xs), 0.9 - 0.3 * smoothstep(200, 1200, np.hypot(xs - 900, ys - 100)),
         0.5 * xs + 0.87 * ys),
        (np.clip(ys - top, 0, 1), 0.92 - 0.12 * smoothstep(top, front, ys), ys),
        (np.clip(ys - front, 0, 1), np.full_like(xs, 0.4), xs),
    ]
    cast = [[(140, 760), (330, 780), (470, 700), (330, 680)],  # shadows fall to the left
            [(520, 770), (700, 770), (560, 690), (380, 690)],
            [(700, 780), (880, 780), (700, 700), (560, 700)]]
    shadow = np.max([_fill(p) for p in cast], axis=0) * (ys > top)
    parts.append((shadow, np.full_like(xs, 0.38), ys))

    # The block: top lit, right face half lit, front face in shade.
    x0, x1, y0, y1, dx, dy = 700.0, 880.0, 560.0, 760.0, 70.0, -55.0
    for face, tone in (
        ([(x0, y0), (x1, y0), (x1 + dx, y0 + dy), (x0 + dx, y0 + dy)], 0.95),
        ([(x1, y0), (x1 + dx, y0 + dy), (x1 + dx, y1 + dy), (x1, y1)], 0.55),
        ([(x0, y0), (x1, y0), (x1, y1), (x0, y1)], 0.3),
    ):
        parts.append((_fill(face), np.full_like(xs, tone), xs - 0.4 * ys))

    # The jar, an upright cylinder: hatching curves round it like its rim.
    jx, rx, ry, jtop, jbottom = 560.0, 95.0, 26.0, 420.0, 740.0
    u = np.clip((xs - jx) / rx, -1, 1)
    nz = np.sqrt(1 - u**2)
    body = np.clip(rx + 0.5 - np.abs(xs - jx), 0, 1) * (ys > jtop) * (ys < jbottom + ry * nz)
    lit = np.clip(u * light[0] + nz * light[2], 0, 1)
    parts.append((body, 0.1 + 0.9 * lit**1.3, ys + ry * nz))
    rim = np.clip(40 * (1 - np.hypot((xs - jx) / rx, (ys - jtop) / ry)), 0, 1)
    parts.append((rim, np.full_like(xs, 0.93), xs))

    # The ball: hatching in circles round its highlight, some light bounced off the table.
    bx, by, r = 300.0, 600.0, 150.0
    nx, ny = (xs - bx) / r, (ys - by) / r
    ball = np.clip((1 - np.hypot(nx, ny)) * r + 0.5, 0, 1)
    nzb = np.sqrt(np.clip(1 - nx**2 - ny**2, 0, 1))
    shade = np.clip(nx * light[0] + ny * light[1] + nzb * light[2], 0, 1)
    bounce = 0.18 * smoothstep(0.2, 1.0, ny - nx) * (shade < 0.1)
    rings = np.hypot(xs - bx - 0.5 * r, ys - by + 0.55 * r)
    parts.append((ball, 0.06 + 0.9 * shade**0.9 + bounce, rings))

    tone, phase = np.zeros_like(xs), np.zeros_like(xs)
    label = np.zeros(xs.shape, np.uint8)
    for i, (cover, t, p) in enumerate(parts):
        tone = tone * (1 - cover) + t * cover
        phase = phase * (1 - cover) + p * cover
        label[cover > 0.5] = i
    return tone, phase, label


def _hatch(
    rng: np.random.Generator, phase: np.ndarray, along: np.ndarray, spacing: float, dark: np.ndarray
) -> np.ndarray:
    """Pen lines ``spacing`` px apart across ``phase`` (px), drawn where ``dark`` > 0.

    Each line is nudged sideways and broken by short gaps at its own random rhythm along
    ``along``, and swells a little where the tone is darkest, as a nib under pressure does.
    """
    k = np.floor(phase / spacing).astype(np.int64) % 997  # per-line random values
    nudge, period, start, gap = rng.random((4, 997))[:, k]
    centre = (np.floor(phase / spacing) + 0.5 + 0.25 * (nudge - 0.5)) * spacing
    half = 0.9 + 0.9 * np.clip(dark, 0, 1)
    line = smoothstep(half + 0.8, half - 0.8, np.abs(phase - centre))
    period = 90 + 160 * period
    broken = (along + period * start) % period < 3 + 6 * gap
    return line * (dark > 0) * ~broken


def crosshatch(rng: np.random.Generator) -> np.ndarray:
    """An ink drawing of a ball, a jar and a block on a table, shaded by cross-hatching.

    The tone map sets how many hatch layers cover a spot: the first follows each form and
    the others cross it at fixed angles, each starting at a darker tone. Hatching is in
    blue-black ink, contours in a warm brown ink, on off-white paper.
    """
    ys, xs = np.mgrid[0:S, 0:S].astype(np.float32)
    tone, form, label = _still_life(xs, ys)
    tone = tone + 0.03 * noise_2d(rng, S, S, 120, 120, 2)
    wobble = 2.5 * noise_2d(rng, S, S, 80, 80, 2)  # a hand's unsteadiness
    ink = np.zeros_like(xs)
    layers = ((None, 11.0, 0.86), (45, 11.0, 0.62), (-30, 10.0, 0.42), (80, 9.0, 0.22))
    for angle, spacing, level in layers:  # (angle in degrees, spacing px, lightest tone inked)
        if angle is None:
            phase, along = form, xs + ys
        else:
            c, s = np.cos(np.radians(angle)), np.sin(np.radians(angle))
            phase, along = c * ys - s * xs, c * xs + s * ys
        ink = np.maximum(ink, _hatch(rng, phase + wobble, along, spacing, (level - tone) / level))
    edges = cv2.morphologyEx(label, cv2.MORPH_GRADIENT, np.ones((3, 3), np.uint8)) > 0
    contour = np.clip(1.6 * cv2.GaussianBlur(edges.astype(np.float32), (0, 0), 0.8), 0, 1)

    paper = rgb(246, 240, 226) * (1 + 0.02 * noise_2d(rng, S, S, 120, 120, 2))[..., None]
    blue_black, brown = rgb(30, 36, 62), rgb(150, 70, 44)
    cover = 0.92 * ink[..., None]
    img = paper * (1 - cover) + blue_black * cover
    return _downsample(img * (1 - contour[..., None]) + brown * contour[..., None])


# --------------------------------------------------------------------------- mosaic


def mosaic(rng: np.random.Generator) -> np.ndarray:
    """Irregular tiles set in grey grout, laid out in rings on a ground of broad bands.

    Tiles are the Voronoi cells of jittered grid points: each pixel takes its nearest point,
    found with OpenCV's labelled distance transform. A tile takes the design's colour at its
    point, varied a little, and darkens slightly towards its edges.
    """
    step = 34.0
    grid = np.arange(step / 2, S, step)
    seeds = np.stack(np.meshgrid(grid, grid), -1).reshape(-1, 2)
    seeds = np.clip(seeds + rng.uniform(-0.4, 0.4, seeds.shape) * step, 0, S - 1).astype(int)
    points = np.full((S, S), 255, np.uint8)
    points[seeds[:, 1], seeds[:, 0]] = 0
    _, labels = cv2.distanceTransformWithLabels(
        points, cv2.DIST_L2, 5, labelType=cv2.DIST_LABEL_PIXEL
    )
    seed_of = np.zeros(labels.max() + 1, np.int64)
    seed_of[labels[seeds[:, 1], seeds[:, 0]]] = np.arange(len(seeds))
    tile = seed_of[labels]  # (S, S) index of each pixel's seed

    palette = np.array([rgb(186, 82, 58), rgb(224, 170, 74), rgb(66, 94, 132), rgb(128, 150, 112),
                        rgb(236, 224, 198), rgb(52, 46, 52)])
    sx, sy = seeds[:, 0].astype(np.float64), seeds[:, 1].astype(np.float64)
    band = np.floor((sx + 0.6 * sy + 60 * np.sin(sy / 140)) / 170) % 2
    design = np.where(band > 0, 3, 4)
    for cx, cy, r in ((330, 360, 250), (780, 720, 200), (820, 170, 120)):
        ring = np.floor(np.hypot(sx - cx, sy - cy) / 52).astype(int)
        design = np.where(ring * 52 < r, np.array([0, 1, 2, 1, 5])[ring % 5], design)
    colour = palette[design] * rng.uniform(0.9, 1.08, (len(seeds), 1))

    boundary = cv2.morphologyEx(tile.astype(np.float32), cv2.MORPH_GRADIENT, np.ones((3, 3))) > 0
    dist = cv2.distanceTransform((~boundary).astype(np.uint8), cv2.DIST_L2, 5)
    bevel = 0.9 + 0.1 * smoothstep(1.5, 8.0, dist)
    grout = smoothstep(2.2, 1.0, dist)[..., None]
    return _downsample(colour[tile] * bevel[..., None] * (1 - grout) + rgb(150, 146, 138) * grout)
