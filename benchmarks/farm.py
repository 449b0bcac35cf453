"""Render farm: measured throughput on this machine, and a makespan simulation on N machines.

(a) The same multi-shot clip rendered twice, from scratch: one process with two torch
    threads, and two Dask workers with one thread each (``--workers 2``). Printed: wall
    seconds and frames per second of each, and their ratio. On two cores the gain comes from
    torch not filling two cores with one small frame; it is no N× speed-up.
(b) From (a)'s measured seconds per frame (a shot's first frame and a warm-started frame,
    read from the render's records), the makespan of a typical 3-minute music-video cut
    (shots of 2-4 s at 25 frames/s, seeded) scheduled longest shot first (Graham 1969) on
    N = 1 ... 64 machines, and the same cut with one 30-second long take in it: how close to
    N× it scales, and where the long take (one task: its frames depend on each other) sets
    the floor.

    python benchmarks/farm.py                         # the sample clip cut into 4 shots
    python benchmarks/farm.py --width 128 --iterations 2 --frames 8   # smoke test
"""

from __future__ import annotations

import argparse
import heapq
import os
import random
import shutil
import subprocess
import sys
import tempfile
import time
from pathlib import Path

from common import ROOT, SAMPLE_FRAMES, SAMPLE_STYLE, target_line
from framestyle import store


def render_seconds(clip: Path, shots: Path, out: Path, width: int, iterations: int, extra: list[str]) -> float:
    cmd = [sys.executable, "-m", "framestyle", "stylise", str(clip), "--style", str(SAMPLE_STYLE), "--out", str(out),
           "--shot-list", str(shots), "--width", str(width), "--iterations", str(iterations), "-q", *extra]
    t0 = time.perf_counter()
    subprocess.run(cmd, check=True, env={**os.environ, "PYTHONPATH": str(ROOT)}, stdout=subprocess.DEVNULL)
    return time.perf_counter() - t0


def frame_times(out: Path, starts: set[str]) -> tuple[float, float]:
    """Mean seconds of shots' first frames and of warm-started frames, from the records."""
    entries = store.Store(out).finished()
    first = [e["seconds"] for n, e in entries.items() if n in starts]
    warm = [e["seconds"] for n, e in entries.items() if n not in starts]
    return sum(first) / len(first), sum(warm) / len(warm)


def makespan(lengths: list[int], machines: int, first: float, warm: float) -> float:
    """Longest-processing-time list scheduling of shots (frames) on identical machines."""
    loads = [0.0] * machines
    for n in sorted(lengths, reverse=True):
        heapq.heapreplace(loads, loads[0] + first + (n - 1) * warm)
    return max(loads)


def music_video_cut(seconds: float, fps: float, seed: int, long_take: float = 0.0) -> list[int]:
    """Shot lengths (frames) of a cut of shots between 2 and 4 s, with an optional long take."""
    rng, lengths, total = random.Random(seed), [], seconds * fps - long_take * fps
    if long_take:
        lengths.append(round(long_take * fps))
    while total > 0:
        n = min(round(rng.uniform(2, 4) * fps), round(total))
        lengths.append(n)
        total -= n
    return lengths


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--width", type=int, default=240)
    parser.add_argument("--iterations", type=int, default=300)
    parser.add_argument("--frames", type=int, default=48, help="first N frames of the sample clip")
    args = parser.parse_args()
    with tempfile.TemporaryDirectory() as tmp:
        tmp = Path(tmp)
        clip = tmp / "clip"
        clip.mkdir()
        files = sorted(SAMPLE_FRAMES.glob("*.png"))[: args.frames]
        for f in files:
            shutil.copy(f, clip / f.name)
        step = max(1, len(files) // 4)
        numbers = [int(f.stem.split("_")[-1]) for f in files]
        shots = tmp / "shots.txt"
        shots.write_text("".join(f"{numbers[i]}\n" for i in range(0, len(files), step)))
        starts = {files[i].name for i in range(0, len(files), step)}
        print(f"(a) {len(files)} frames of the sample clip in {len(starts)} shots, width {args.width}, "
              f"{os.cpu_count()} cores")
        one = render_seconds(clip, shots, tmp / "one", args.width, args.iterations, ["--threads", str(os.cpu_count())])
        two = render_seconds(clip, shots, tmp / "two", args.width, args.iterations, ["--workers", "2"])
        n = len(files)
        print(f"  1 worker  × {os.cpu_count()} threads: {one:7.1f} s, {n / one:6.3f} frames/s")
        print(f"  2 workers × {max(1, (os.cpu_count() or 2) // 2)} thread(s): {two:7.1f} s, {n / two:6.3f} frames/s "
              f"(including the cluster's start)")
        print(f"  ratio frames/s 2 workers / 1 worker = {one / two:.3f}")
        first, warm = frame_times(tmp / "one", starts)
    print(f"\n(b) measured: a shot's first frame {first:.2f} s, a warm-started frame {warm:.2f} s")
    cut = music_video_cut(180, 25, seed=1)
    take = music_video_cut(180, 25, seed=1, long_take=30)
    print(f"  3-minute cut at 25 frames/s: {len(cut)} shots of 2-4 s; with a 30 s long take: {len(take)} shots")
    base_cut, base_take = makespan(cut, 1, first, warm), makespan(take, 1, first, warm)
    print(f"  {'machines':>8}  {'speed-up':>9}  {'of N×':>6}  {'with long take':>14}  {'of N×':>6}")
    for machines in (1, 2, 4, 8, 16, 32, 64):
        s_cut = base_cut / makespan(cut, machines, first, warm)
        s_take = base_take / makespan(take, machines, first, warm)
        print(f"  {machines:>8}  {s_cut:>8.2f}×  {s_cut / machines:>6.0%}  {s_take:>13.2f}×  {s_take / machines:>6.0%}")
    floor = base_take / (first + (30 * 25 - 1) * warm)
    print(f"  the long take alone bounds the speed-up at {floor:.1f}× (split it with a shot list to go further)")
    print(target_line("2-worker / 1-worker time on 2 cores", two / one, 1.0))


if __name__ == "__main__":
    main()
