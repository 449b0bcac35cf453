"""Coarse-to-fine at 1280×720: seconds per frame and losses reached, with and without.

A shot's first frame is solved once at full size (levels=1) and once coarse-to-fine
(levels=3: 320×180, 640×360, then 1280×720; Gatys et al. 2017), with the same iteration cap
and tolerance. Printed: seconds, iterations per level, and the final style and content
losses (relative, as framestyle.style.losses defines them), plus the time ratio.

    python benchmarks/coarse_to_fine.py                       # 1280×720 (several minutes)
    python benchmarks/coarse_to_fine.py --width 256 --iterations 4   # smoke test
"""

from __future__ import annotations

import argparse
import dataclasses
import time

from common import SAMPLE_FRAMES, SAMPLE_STYLE
from framestyle import io
from framestyle.imaging import resize
from framestyle.style.look import build_look
from framestyle.style.network import load_network
from framestyle.pipeline import solver_params, stylise
from framestyle.working import prepare_frame
from framestyle.settings import Settings


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--width", type=int, default=1280)
    parser.add_argument("--levels", type=int, default=3)
    parser.add_argument("--iterations", type=int, default=Settings.iterations)
    args = parser.parse_args()
    size = (args.width, args.width * 9 // 16)
    source = io.open_source(SAMPLE_FRAMES)
    raw = resize(io.read_frame(source, 0), size)  # the sample frame upscaled to size
    net = load_network(Settings.network)
    print(f"first frame of a shot at {size[0]}×{size[1]}, network {net.name}, cap {args.iterations} iterations")
    seconds = {}
    for levels in (1, args.levels):
        settings = dataclasses.replace(Settings(styles=(str(SAMPLE_STYLE),)), levels=levels,
                                       iterations=args.iterations, width=args.width)
        frame = prepare_frame(raw, size, settings, linear=False)
        look = build_look(net, settings)
        t0 = time.perf_counter()
        _, stats = stylise(look, frame.content, 0, [], solver_params(settings), settings.seed, temporal=False)
        seconds[levels] = time.perf_counter() - t0
        print(f"  levels={levels}: {seconds[levels]:7.1f} s, {stats.iterations:4d} iterations in all, "
              f"style loss {stats.style:.4f}, content loss {stats.content:.4f}", flush=True)
    print(f"ratio seconds coarse-to-fine / full size = {seconds[args.levels] / seconds[1]:.3f}")


if __name__ == "__main__":
    main()
