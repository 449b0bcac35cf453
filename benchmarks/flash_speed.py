"""Flash analysis speed: frames per second of ``analyse_flashes`` at three frame sizes.

The frames are made beforehand (a drifting texture with a strobing patch and fine noise,
so the per-block transition, counting and area paths all run) and fed through a generator,
so only the analysis is timed. Target: at least 100 frames/s at 1280×720 on a 2-core CPU,
i.e. 100 fps / measured fps ≤ 1.

Run from the repository root, with nothing else heavy running::

    python benchmarks/flash_speed.py                 # 300 frames per size
    python benchmarks/flash_speed.py --frames 30     # smoke test
"""

from __future__ import annotations

import argparse
import os
import time

import cv2
import numpy as np

from common import target_line
from framestyle.qc.flashes import analyse_flashes

TARGET_FPS = 100.0
SIZES = ((640, 360), (1280, 720), (1920, 1080))
DISTINCT = 12  # distinct frames cycled through, made once per size
FPS = 25.0


def make_frames(width: int, height: int, seed: int = 0) -> list[np.ndarray]:
    """``DISTINCT`` float32 sRGB frames: drifting texture, fine noise, a strobing patch."""
    rng = np.random.default_rng(seed)
    texture = cv2.resize(rng.random((height // 16 + 2, width // 16 + 2, 3), dtype=np.float32),
                         (width + 64, height), interpolation=cv2.INTER_CUBIC)
    frames = []
    for k in range(DISTINCT):
        frame = texture[:, 4 * k:4 * k + width].copy()
        frame += rng.normal(0.0, 0.03, frame.shape).astype(np.float32)
        if (k // 3) % 2:  # 4 flashes/s at 25 fps over a third of the frame
            frame[height // 3:2 * height // 3, width // 3:2 * width // 3] = 1.0
        frames.append(np.clip(frame, 0.0, 1.0))
    return frames


def measure(width: int, height: int, count: int) -> float:
    """Frames per second of the analysis over ``count`` frames of ``width`` × ``height``."""
    frames = make_frames(width, height)
    analyse_flashes(frames[:4], FPS)  # warm-up: first calls pay for allocations and threads
    stream = (frames[i % DISTINCT] for i in range(count))
    start = time.perf_counter()
    report = analyse_flashes(stream, FPS)
    seconds = time.perf_counter() - start
    assert report.frames == count
    return count / seconds


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--frames", type=int, default=300, help="frames timed per size")
    args = parser.parse_args()

    print(f"flash analysis speed, {args.frames} frames per size, OpenCV {cv2.__version__} "
          f"({cv2.getNumThreads()} threads), {os.cpu_count()} CPUs")
    measured = {}
    for width, height in SIZES:
        measured[width, height] = fps = measure(width, height, args.frames)
        print(f"  {width}×{height}: {fps:7.1f} frames/s ({1000 / fps:6.2f} ms per frame)", flush=True)
    print(target_line("100 fps / measured fps at 1280x720", TARGET_FPS / measured[1280, 720], 1.0))


if __name__ == "__main__":
    main()
