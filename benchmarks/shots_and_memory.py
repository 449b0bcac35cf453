"""Shot-detection speed, and a render's peak memory against clip length.

(a) Frames per second of :func:`framestyle.shots.detect.frame_signature` plus
    :func:`framestyle.shots.detect.detect_shots` on synthetic frames generated in memory (only the
    detection is timed, not the generation).
(b) Peak resident memory of a whole render (high-water mark of a fresh child process per
    run) for a short and a long synthetic clip, rendered with tiny settings so the long one
    is feasible. A render streams frames and keeps a bounded history, so memory must not
    grow with clip length. Target: peak(long) / peak(short) ≤ 1.1.

Run from the repository root::

    python benchmarks/shots_and_memory.py                     # 300 frames 640×360; 48 and 480 frames
    python benchmarks/shots_and_memory.py --fps-frames 30 --frames 3,6   # smoke test
"""

from __future__ import annotations

import argparse
import resource
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import cv2
import numpy as np

from common import SAMPLE_STYLE, target_line
from framestyle import io
from framestyle.pipeline import render
from framestyle.settings import Settings
from framestyle.shots.detect import detect_shots, frame_signature

MEMORY_TARGET = 1.1
# One base colour per shot, in different histogram bins so the cuts are plain to see.
_PALETTES = ((0.80, 0.45, 0.20), (0.20, 0.40, 0.80), (0.35, 0.75, 0.30))


class SyntheticClip:
    """A clip of ``count`` frames (H, W, 3) float32: a coloured texture panning right,
    with a hard cut to a new texture and palette at 40 % and at 75 % of the clip."""

    def __init__(self, count: int, width: int, height: int, seed: int = 0):
        self.count, self.width, self.height = count, width, height
        self.cuts = sorted({round(count * 0.4), round(count * 0.75)} - {0})
        rng = np.random.default_rng(seed)
        self.textures = [self._texture(rng, palette) for palette in _PALETTES[:len(self.cuts) + 1]]

    def _texture(self, rng: np.random.Generator, palette: tuple[float, ...]) -> np.ndarray:
        """Smooth colour blobs plus finer detail around ``palette``, wide enough to pan over."""
        size = (self.width + self.count + 2, self.height + 8)  # (w, h): one pixel of pan per frame
        layers = [cv2.resize(rng.standard_normal((cells, 2 * cells, 3)).astype(np.float32), size,
                             interpolation=cv2.INTER_CUBIC) * amplitude
                  for cells, amplitude in ((6, 0.12), (40, 0.04))]
        return np.clip(np.float32(palette) + sum(layers), 0.0, 1.0)

    def frame(self, index: int) -> np.ndarray:
        shot = sum(index >= c for c in self.cuts)
        y = round(3 + 3 * np.sin(index / 9))  # a slow vertical bob on top of the pan
        return np.ascontiguousarray(self.textures[shot][y:y + self.height, index:index + self.width])


def detection_speed(count: int, width: int, height: int) -> None:
    clip = SyntheticClip(count, width, height)
    frame_signature(clip.frame(0))  # warm-up
    signatures, seconds = [], 0.0
    for index in range(count):
        frame = clip.frame(index)
        t0 = time.perf_counter()
        signatures.append(frame_signature(frame))
        seconds += time.perf_counter() - t0
    t0 = time.perf_counter()
    shots = detect_shots(signatures)
    detect = time.perf_counter() - t0
    found = [s.start for s in shots[1:]]
    print(f"(a) shot detection, {count} synthetic frames {width}×{height}, cuts at {clip.cuts}")
    print(f"    frame_signature: {seconds / count * 1000:.2f} ms per frame; "
          f"detect_shots: {detect * 1000:.1f} ms for the clip")
    print(f"    detected cuts at {found}{'' if found == clip.cuts else '  (DIFFERENT from the real cuts)'}")
    print(f"    speed: {count / (seconds + detect):.0f} frames per second")


def child_render(input_path: str, out: str, width: int, iterations: int) -> None:
    """Run one render in this (child) process and print its peak resident memory in KiB."""
    settings = Settings(styles=(str(SAMPLE_STYLE),), width=width, iterations=iterations, tolerance=0.0)
    t0 = time.perf_counter()
    render(Path(input_path), Path(out), settings)
    peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss  # KiB on Linux
    if sys.platform == "darwin":
        peak //= 1024  # bytes there
    print(f"peak_kib {peak} seconds {time.perf_counter() - t0:.1f}")


def peak_memory(count: int, width: int, iterations: int, work: Path) -> tuple[float, float]:
    """Write a synthetic clip of ``count`` 320×180 frames, render it in a child process;
    return (peak MiB, seconds)."""
    clip = SyntheticClip(count, 320, 180, seed=count)
    folder = work / f"clip{count}"
    for index in range(count):
        io.write_image(folder / f"synth_{index + 1:04d}.png", clip.frame(index))
    cmd = [sys.executable, __file__, "--child-render", str(folder), str(work / f"out{count}"),
           str(width), str(iterations)]
    done = subprocess.run(cmd, capture_output=True, text=True)
    if done.returncode != 0:
        raise SystemExit(f"render of the {count}-frame clip failed:\n{done.stderr}")
    fields = done.stdout.split()
    return int(fields[fields.index("peak_kib") + 1]) / 1024, float(fields[fields.index("seconds") + 1])


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--fps-frames", type=int, default=300, help="frames for the detection speed")
    parser.add_argument("--fps-width", type=int, default=640)
    parser.add_argument("--fps-height", type=int, default=360)
    parser.add_argument("--frames", default="48,480", help="SHORT,LONG clip lengths for the memory test")
    parser.add_argument("--width", type=int, default=128, help="render working width (72 px high)")
    parser.add_argument("--iterations", type=int, default=2)
    parser.add_argument("--child-render", nargs=4, help=argparse.SUPPRESS)  # internal: one measured render
    args = parser.parse_args()
    if args.child_render:
        input_path, out, width, iterations = args.child_render
        child_render(input_path, out, int(width), int(iterations))
        return

    detection_speed(args.fps_frames, args.fps_width, args.fps_height)
    short, long = (int(n) for n in args.frames.split(","))
    print(f"(b) peak memory of a render (width {args.width}, {args.iterations} iterations, "
          f"tolerance 0, temporal), one child process per clip")
    peaks = {}
    with tempfile.TemporaryDirectory(prefix="framestyle_bench_") as tmp:
        for count in (short, long):
            peaks[count], seconds = peak_memory(count, args.width, args.iterations, Path(tmp))
            print(f"    {count:5d} frames: peak {peaks[count]:7.1f} MiB, render {seconds:.1f} s "
                  f"({seconds / count:.2f} s per frame)", flush=True)
    print(f"    difference: {peaks[long] - peaks[short]:+.1f} MiB for {long - short} more frames")
    print(target_line(f"peak memory {long} / {short} frames", peaks[long] / peaks[short], MEMORY_TARGET))


if __name__ == "__main__":
    main()
