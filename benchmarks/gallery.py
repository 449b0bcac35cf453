"""Make the README's gallery: one sample-clip frame under each look control.

Each still is the frame stylised on its own (a shot's first-frame treatment) with the library's
own pieces, so the gallery shows exactly what a render's first frame would look like:

    python benchmarks/gallery.py            # writes benchmarks/gallery/*.png (about 2 minutes)
"""

from __future__ import annotations

import argparse
import dataclasses
from pathlib import Path

import cv2
import numpy as np

from common import ROOT, SAMPLE_FRAMES, SAMPLE_STYLE
from framestyle import io
from framestyle.finish.matte import soft_matte
from framestyle.style.look import build_look
from framestyle.style.network import load_network
from framestyle.pipeline import solver_params, stylise
from framestyle.working import deliver, prepare_frame
from framestyle.settings import Settings

INK = ROOT / "sample_clip" / "style_ink.png"
BASE = Settings(styles=(str(SAMPLE_STYLE),))

VARIANTS = {  # file name -> (caption, settings changes)
    "default": ("default", {}),
    "colour_luma": ("--colour luma (footage's colours)", {"colour": "luma"}),
    "strength_half": ("--strength 0.5", {"strength": 0.5}),
    "blend": ("two styles, --style-mix 0.5,0.5", {"styles": (str(SAMPLE_STYLE), str(INK)), "style_mix": (0.5, 0.5)}),
    "strokes_small": ("--stroke-size 0.6 (small strokes)", {"stroke_size": 0.6}),
    "strokes_large": ("--stroke-size 2.5 (large strokes)", {"stroke_size": 2.5}),
    "matte": ("--matte (tree and shore kept)", {}),
}


def matte_for(shape: tuple[int, int]) -> np.ndarray:
    """A matte that keeps the lower right of the frame (the tree and shore) untouched."""
    matte = np.ones(shape, np.float32)
    cv2.ellipse(matte, (shape[1] * 3 // 4, shape[0]), (shape[1] // 3, shape[0] * 2 // 3), 0, 0, 360, 0.0, -1)
    return soft_matte(matte, 6.0)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--frame", type=int, default=1, help="sample clip frame number")
    parser.add_argument("--out", type=Path, default=Path(__file__).resolve().parent / "gallery")
    parser.add_argument("--iterations", type=int, default=BASE.iterations)
    args = parser.parse_args()
    source = io.open_source(SAMPLE_FRAMES)
    index = args.frame - 1
    raw = io.read_frame(source, index)
    size = (source.width, source.height)
    net = load_network(BASE.network)
    io.write_image(args.out / "source.png", raw)
    for name, (caption, changes) in VARIANTS.items():
        settings = dataclasses.replace(BASE, iterations=args.iterations, **changes)
        frame = prepare_frame(raw, size, settings, linear=False)
        look = build_look(net, settings, frame.display)
        result, stats = stylise(look, frame.content, index, [], solver_params(settings), settings.seed, temporal=False)
        matte = matte_for(raw.shape[:2]) if name == "matte" else None
        io.write_image(args.out / f"{name}.png", deliver(result, frame, settings, matte, linear=False))
        print(f"{name:14s} {caption:40s} {stats.iterations:3d} iterations", flush=True)


if __name__ == "__main__":
    main()
