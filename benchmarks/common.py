"""Shared bits of the benchmark scripts: sample-clip paths and the report's target lines."""

from __future__ import annotations

from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
SAMPLE_FRAMES = ROOT / "sample_clip" / "frames"
SAMPLE_STYLE = ROOT / "sample_clip" / "style.png"
OUT = Path(__file__).resolve().parent / "out"


def target_line(what: str, value: float, limit: float) -> str:
    """``ratio WHAT = X (target ≤ LIMIT): met`` — the closing line of every benchmark."""
    verdict = "met" if value <= limit else "NOT MET"
    return f"ratio {what} = {value:.3f} (target ≤ {limit:g}): {verdict}"


def print_progress(event: str, **info) -> None:
    """A render progress callback printing one line per stylised frame."""
    if event == "frame" and not info.get("skipped"):
        print(f"  frame {info['index']:4d}  shot {info['shot']}  {info['iterations']:3d} it  "
              f"{info['seconds']:6.2f} s", flush=True)
