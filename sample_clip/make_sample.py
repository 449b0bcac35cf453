"""Generate the bundled demo input: a two-shot 48-frame clip and the style images.

Everything is procedural and deterministic (fixed seeds, numpy + OpenCV only), so the files
in this folder can be regenerated pixel for pixel:

    python sample_clip/make_sample.py [--out DIR]

Shot 1 (frames 1-28, ``lake.py``): the camera drifts right over a mountain lake in the
afternoon. Shot 2 (frames 29-48, ``market.py``), after one hard cut: a market street at
midday; the camera pans left and pulls back while a ball rolls behind a post. Both are
composited from parallax layers (``layers.py``). The style images come from ``styles.py``.
"""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

import cv2
import numpy as np

HERE = Path(__file__).resolve().parent
sys.path[:0] = [str(HERE), str(HERE.parent)]  # the sibling modules, and framestyle from a checkout
from framestyle.atomic import write_bytes  # noqa: E402
from lake import lake_shot  # noqa: E402
from layers import render  # noqa: E402
from market import market_shot  # noqa: E402
from styles import collage, crosshatch, mosaic  # noqa: E402

SEED = 20240611
SHOTS = ((lake_shot, SEED), (market_shot, SEED + 3))
STYLES = (("style.png", collage, SEED + 1), ("style_ink.png", crosshatch, SEED + 2),
          ("style_mosaic.png", mosaic, SEED + 4))  # fmt: skip


def write_png(path: Path, img_rgb: np.ndarray) -> None:
    """Write an RGB image (uint8, or float in [0, 1]) as an 8-bit PNG, atomically."""
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
    """Write the frames and the style images under ``out_dir``; returns the paths written."""
    written = []
    for make, seed in SHOTS:
        layers, cam = make(np.random.default_rng(seed))
        for t in range(len(cam.pan_x)):
            written.append(out_dir / "frames" / f"drift_{len(written) + 1:04d}.png")
            write_png(written[-1], render(layers, cam, t))
    for name, make_style, seed in STYLES:
        write_png(out_dir / name, make_style(np.random.default_rng(seed)))
        written.append(out_dir / name)
    return written


def main(argv: list[str] | None = None) -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument(
        "--out",
        type=Path,
        default=HERE,
        help="folder to write frames/ and the style images into (default: beside this script)",
    )
    args = parser.parse_args(argv)
    paths = generate(args.out)
    print(f"wrote {len(paths)} files under {args.out}")


if __name__ == "__main__":
    main()
