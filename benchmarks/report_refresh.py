"""Render report refresh cost: what a render pays for ``OUT/report.html`` after every shot.

Times, on a finished render's output folder, (a) a refresh with nothing changed (the page
alone: what a render's start and end pay), (b) a refresh after one shot changed (its strip
and plot redrawn: what every finished shot pays), (c) ``framestyle report OUT`` (every
picture redrawn). Target: a shot's refresh costs less than rendering one of its frames,
i.e. (b) / the render's mean seconds per frame ≤ 1.

Without ``--out`` the sample clip is rendered first into a temporary folder (default
settings: a few minutes on 2 cores). Run from the repository root, nothing else heavy running::

    python benchmarks/report_refresh.py                       # render the sample clip, then time
    python benchmarks/report_refresh.py --out OUT             # an existing render's folder
    python benchmarks/report_refresh.py --width 128 --iterations 2 --frames 12   # smoke test
"""

from __future__ import annotations

import argparse
import os
import shutil
import statistics
import tempfile
import time
from pathlib import Path

from common import SAMPLE_FRAMES, SAMPLE_STYLE, print_progress, target_line
from framestyle import io, pipeline, store
from framestyle.report import refresh_report
from framestyle.settings import Settings
from framestyle.shots.cutlists import clip_timecode

REPEATS = 3


def timed(call) -> float:
    """Median wall-clock seconds of ``REPEATS`` calls."""
    times = []
    for _ in range(REPEATS):
        start = time.perf_counter()
        call()
        times.append(time.perf_counter() - start)
    return statistics.median(times)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--out", type=Path, help="a finished render's output folder (default: render the sample)")
    parser.add_argument("--frames", type=int, help="render only the first N sample frames")
    parser.add_argument("--width", type=int, default=Settings.width)
    parser.add_argument("--iterations", type=int, default=Settings.iterations)
    args = parser.parse_args()
    scratch = Path(tempfile.mkdtemp(prefix="report_refresh_"))
    try:
        out = args.out
        if out is None:
            frames = SAMPLE_FRAMES
            if args.frames:
                frames = scratch / "frames"
                frames.mkdir()
                for path in sorted(SAMPLE_FRAMES.glob("*.png"))[:args.frames]:
                    shutil.copy(path, frames / path.name)
            out = scratch / "out"
            settings = Settings(styles=(str(SAMPLE_STYLE),), width=args.width, iterations=args.iterations)
            print(f"rendering {frames} into {out}")
            pipeline.render(frames, out, settings, progress=print_progress)
        manifest = store.read_manifest(out)
        settings = Settings.from_dict(manifest["settings"])
        source = io.open_source(Path(manifest["inputs"]["input"]))
        timecode = clip_timecode(source, settings)
        records = store.Store(out).records()
        seconds = [e["seconds"] for r in records.values() for e in r["frames"].values()]
        per_frame = sum(seconds) / len(seconds)
        last = max(records)
        record = out / ".framestyle" / "shots" / f"shot_{last:03d}.json"

        def after_a_shot():
            os.utime(record)  # the shot's record changed: its pictures are redrawn
            refresh_report(out, source, settings, timecode)

        unchanged = timed(lambda: refresh_report(out, source, settings, timecode))
        shot = timed(after_a_shot)
        redraw = timed(lambda: refresh_report(out, source, settings, timecode, redraw=True))
        print(f"{len(seconds)} frames in {len(records)} shots, {source.width}×{source.height}, "
              f"{per_frame:.2f} s a frame to render")
        print(f"refresh, nothing changed:        {unchanged:.3f} s")
        print(f"refresh after shot {last} ({len(records[last]['frames'])} frames): {shot:.3f} s")
        print(f"framestyle report (every picture): {redraw:.3f} s")
        print(target_line("refresh after a shot / seconds a frame", shot / per_frame, 1.0))
    finally:
        shutil.rmtree(scratch, ignore_errors=True)


if __name__ == "__main__":
    main()
