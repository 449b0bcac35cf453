"""Solver overhead: seconds per L-BFGS iteration against a bare forward+backward pass.

One solver iteration is one evaluation of the loss and its gradient (the solver runs L-BFGS
without line search, Gatys et al. 2016 image optimisation), so its cost should be close to
that of the network's forward and backward pass through the same layers; the rest (Gram
matrices, losses, the L-BFGS update over the pixels) is overhead. Target: full iteration /
bare pass ≤ 1.3.

Run from the repository root::

    python benchmarks/solver_speed.py                      # 640×360, 60 iterations
    python benchmarks/solver_speed.py --width 128 --height 72 --iterations 3   # smoke test
"""

from __future__ import annotations

import argparse
import time

import torch

from common import SAMPLE_FRAMES, SAMPLE_STYLE, target_line
from framestyle import io
from framestyle.imaging import resize
from framestyle.style.look import build_look
from framestyle.style.network import load_network
from framestyle.temporal import fresh_problem, start_noise
from framestyle.settings import Settings
from framestyle.style.solver import solve

TARGET = 1.3


def bare_pass(net, image: torch.Tensor, layers: list[str]) -> None:
    """One forward pass through ``layers`` and the backward pass of the sum of their means."""
    x = image.detach().clone().requires_grad_(True)
    feats = net(x, layers)
    sum(f.mean() for f in feats.values()).backward()


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--width", type=int, default=640)
    parser.add_argument("--height", type=int, default=360)
    parser.add_argument("--iterations", type=int, default=60,
                        help="timed iterations / passes (enough to amortise the solver's one-off content pass)")
    args = parser.parse_args()

    size = (args.width, args.height)
    settings = Settings(styles=(str(SAMPLE_STYLE),), tolerance=0.0)  # tolerance 0: run exactly N
    look = build_look(load_network(settings.network), settings)
    targets = look.targets(size)
    source = io.open_source(SAMPLE_FRAMES)
    content = resize(io.read_frame(source, 0), size)
    problem = fresh_problem(content, start_noise((1, 3, size[1], size[0]), settings.seed, 0))
    layers = list(dict.fromkeys([*targets, settings.content_layer or look.net.content_layer]))

    # Warm-up: first calls pay for allocator growth and kernel selection.
    solve(look.net, problem, targets, settings, iterations=2)
    bare_pass(look.net, problem.init, layers)

    t0 = time.perf_counter()
    _, stats = solve(look.net, problem, targets, settings, iterations=args.iterations)
    per_iteration = (time.perf_counter() - t0) / stats.iterations

    t0 = time.perf_counter()
    for _ in range(args.iterations):
        bare_pass(look.net, problem.init, layers)
    per_pass = (time.perf_counter() - t0) / args.iterations

    print(f"solver speed at {size[0]}×{size[1]}, network {settings.network}, "
          f"torch {torch.__version__}, {torch.get_num_threads()} threads")
    print(f"  layers: {', '.join(layers)}")
    print(f"  solver: {stats.iterations} iterations, {per_iteration:.4f} s per iteration")
    print(f"  bare forward+backward: {args.iterations} passes, {per_pass:.4f} s per pass")
    print(target_line("full iteration / bare pass", per_iteration / per_pass, TARGET))


if __name__ == "__main__":
    main()
