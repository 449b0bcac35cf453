"""Temporal stability and warm-start speed: the same clip rendered with and without the
temporal terms.

Renders the input twice with identical settings except ``temporal`` (Ruder, Dosovitskiy &
Brox 2016: warm start from the warped previous frame plus short- and long-term temporal
losses) and measures each render's warping error (Lai et al. 2018) per shot with
:func:`framestyle.qc.stability.stability`. Targets, from one run:

* warping error, temporal / per-frame ≤ 0.2 (overall, frame-pair weighted);
* mean seconds of a warm-started frame / mean seconds of a shot's first frame ≤ 0.35
  (from the temporal render's shot records).

It also writes a strip of three consecutive frames from the middle of the first shot:
source on top, then the per-frame render, then the temporal render.

Run from the repository root::

    python benchmarks/temporal_stability.py                        # the sample clip, defaults
    python benchmarks/temporal_stability.py --frames 6 --width 128 --iterations 3   # smoke test
"""

from __future__ import annotations

import argparse
import dataclasses
import tempfile
from pathlib import Path
from statistics import mean

import cv2
import numpy as np

from common import OUT, SAMPLE_FRAMES, SAMPLE_STYLE, print_progress, target_line
from framestyle import atomic, io, store
from framestyle.imaging import resize
from framestyle.pipeline import render
from framestyle.qc.stability import ShotStability, overall, stability
from framestyle.settings import Settings

ERROR_TARGET = 0.2
SPEED_TARGET = 0.35
_TILE_WIDTH = 320  # strip tiles are at most this wide
_LABEL_HEIGHT = 22


def first_frames(input_path: Path, count: int, folder: Path) -> Path:
    """Put the first ``count`` frames of a folder or video into ``folder``; return it.

    Folder frames are copied byte for byte; video frames are decoded and written as PNG
    (16-bit when the video is deeper than 8 bits).
    """
    source = io.open_source(input_path)
    if not 2 <= count <= source.count:
        raise SystemExit(f"--frames {count}: need 2..{source.count} for {input_path}")
    folder.mkdir(parents=True, exist_ok=True)
    if source.kind == "folder":
        for name in source.files[:count]:
            atomic.write_bytes(folder / name, (source.path / name).read_bytes())
    else:
        depth = 16 if source.bit_depth > 8 else 8
        for index, frame in io.iter_frames(source, 0, count):
            io.write_image(folder / io.frame_name(source, index), frame, depth)
    return folder


def manifest_timing(out: Path, source: io.FrameSource) -> dict[str, list[dict]]:
    """The temporal render's frame entries, split into shots' first frames and the rest."""
    manifest, finished = store.read_manifest(out), store.Store(out).finished()
    starts = {s["start"] for s in manifest["shots"]}
    split = {"first": [], "warm": []}
    for index in range(source.count):
        entry = finished[io.frame_name(source, index)]
        split["first" if index in starts else "warm"].append(entry)
    return split


def labelled_row(label: str, images: list[np.ndarray], tile: tuple[int, int]) -> np.ndarray:
    """One strip row: a label band above the images side by side, 4-pixel gaps."""
    w, h = tile
    row = np.full((_LABEL_HEIGHT + h + 4, len(images) * (w + 4) + 4, 3), 0.12, np.float32)
    band = np.full((_LABEL_HEIGHT, row.shape[1], 3), 31, np.uint8)  # OpenCV 5 draws text on 8-bit only
    cv2.putText(band, label, (6, _LABEL_HEIGHT - 7), cv2.FONT_HERSHEY_SIMPLEX, 0.5,
                (235, 235, 235), 1, cv2.LINE_AA)
    row[:_LABEL_HEIGHT] = band / 255.0
    for k, image in enumerate(images):
        x = 4 + k * (w + 4)
        row[_LABEL_HEIGHT:_LABEL_HEIGHT + h, x:x + w] = resize(image, tile)
    return row


def write_strip(path: Path, source: io.FrameSource, shot: ShotStability,
                renders: dict[str, Path]) -> list[int]:
    """Write the comparison strip for three consecutive frames mid-shot; return their indices."""
    middle = (shot.shot.start + shot.shot.end) // 2
    chosen = [i for i in (middle - 1, middle, middle + 1) if shot.shot.start <= i <= shot.shot.end]
    w = min(_TILE_WIDTH, source.width)
    tile = (w, max(1, round(source.height * w / source.width)))
    names = [io.frame_name(source, i) for i in chosen]
    rows = [labelled_row(f"source  frames {', '.join(Path(n).stem for n in names)}",
                         [io.read_frame(source, i) for i in chosen], tile)]
    for label, out in renders.items():
        rows.append(labelled_row(label, [io.read_image(out / n) for n in names], tile))
    io.write_image(path, np.concatenate(rows, axis=0))
    return chosen


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--input", type=Path, default=SAMPLE_FRAMES, help="frame folder or video")
    parser.add_argument("--style", type=Path, default=SAMPLE_STYLE)
    parser.add_argument("--frames", type=int, help="use only the first N frames")
    parser.add_argument("--width", type=int, help="working width (default: the Settings default)")
    parser.add_argument("--iterations", type=int, help="iteration cap (default: the Settings default)")
    parser.add_argument("--strip", type=Path, default=OUT / "stability_strip.png")
    parser.add_argument("--keep", type=Path, help="keep the two renders in DIR/per_frame, DIR/temporal")
    args = parser.parse_args()

    chosen = {k: v for k, v in (("width", args.width), ("iterations", args.iterations)) if v is not None}
    settings = Settings(styles=(str(args.style),), **chosen)
    with tempfile.TemporaryDirectory(prefix="framestyle_bench_") as tmp:
        work = Path(tmp)
        input_path = args.input
        if args.frames is not None:
            input_path = first_frames(args.input, args.frames, (work / "input").resolve())
        base = args.keep or work
        # Per-frame first: the process's one-off warm-up then lands outside the timed render.
        renders = {"per-frame (temporal off)": base / "per_frame", "temporal": base / "temporal"}
        for label, out in renders.items():
            print(f"rendering {label} into {out}", flush=True)
            render(input_path, out, dataclasses.replace(settings, temporal=label == "temporal"),
                   restart=True, progress=print_progress)

        source = io.open_source(input_path)
        rows = {label: stability(out, input_path, settings.flow_preset) for label, out in renders.items()}
        per_frame, temporal = rows.values()
        print(f"\nwarping error (Lai et al. 2018) of {args.input}, {source.count} frames, "
              f"settings width {settings.width}, iterations {settings.iterations}")
        print(f"  {'shot':>4}  {'frames':>9}  {'source':>9}  {'per-frame':>9}  {'temporal':>9}  {'ratio':>6}")
        for p, t in zip(per_frame, temporal):
            print(f"  {t.shot.index:>4}  {f'{t.shot.start}-{t.shot.end}':>9}  {t.source:9.5f}  "
                  f"{p.render:9.5f}  {t.render:9.5f}  {t.render / p.render:6.3f}")
        errors = {k: overall(v, "render") for k, v in rows.items()}
        print(f"  {'all':>4}  {'':>9}  {overall(temporal, 'source'):9.5f}  "
              f"{errors['per-frame (temporal off)']:9.5f}  {errors['temporal']:9.5f}")

        timing = manifest_timing(renders["temporal"], source)
        seconds = {k: mean(e["seconds"] for e in v) if v else float("nan") for k, v in timing.items()}
        iters = {k: mean(e["iterations"] for e in v) if v else float("nan") for k, v in timing.items()}
        print("\ntemporal render, from its records")
        print(f"  shots' first frames: {len(timing['first']):4d}, mean {seconds['first']:7.2f} s, "
              f"{iters['first']:6.1f} iterations")
        print(f"  warm-started frames: {len(timing['warm']):4d}, mean {seconds['warm']:7.2f} s, "
              f"{iters['warm']:6.1f} iterations")
        plain = [e for v in manifest_timing(renders["per-frame (temporal off)"], source).values() for e in v]
        print(f"  (per-frame render:   {len(plain):4d}, mean {mean(e['seconds'] for e in plain):7.2f} s, "
              f"{mean(e['iterations'] for e in plain):6.1f} iterations)")

        indices = write_strip(args.strip, source, temporal[0], renders)
        print(f"\nstrip of frames {indices} (source / per-frame / temporal): {args.strip}")
        print(target_line("warping error temporal / per-frame",
                          errors["temporal"] / errors["per-frame (temporal off)"], ERROR_TARGET))
        print(target_line("seconds warm-started frame / shot's first frame",
                          seconds["warm"] / seconds["first"], SPEED_TARGET))


if __name__ == "__main__":
    main()
