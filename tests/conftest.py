"""Shared fixtures: a small two-shot clip cut from the bundled sample, and fast settings."""

import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import cv2
import pytest

from framestyle import store

from framestyle.settings import Settings

ROOT = Path(__file__).resolve().parents[1]
SAMPLE = ROOT / "sample_clip"
STYLE = SAMPLE / "style.png"


@pytest.fixture(scope="session")
def small_clip(tmp_path_factory) -> Path:
    """20 frames at 128×72 around the sample's cut: shot 1 is frames 0-9, shot 2 frames 10-19."""
    folder = tmp_path_factory.mktemp("clip") / "frames"
    folder.mkdir()
    for k, number in enumerate(range(19, 39)):
        image = cv2.imread(str(SAMPLE / "frames" / f"drift_{number:04d}.png"))
        cv2.imwrite(str(folder / f"take_{k + 1:03d}.png"), cv2.resize(image, (128, 72), interpolation=cv2.INTER_AREA))
    return folder


def fast_settings(**changes) -> Settings:
    """Settings small enough for tests: few iterations at 128 pixels wide."""
    base = dict(styles=(str(STYLE),), width=128, iterations=6, long_term=(1, 4))
    return Settings(**{**base, **changes})


def kill_and_resume(clip: Path, tmp_path: Path, options: list[str]) -> None:
    """Render shot 1 of ``clip`` in a subprocess, SIGKILL it mid-shot, re-run the same command.

    Checks: every PNG left behind is valid; re-running finishes; no finished frame was
    rewritten or solved twice; the result equals an uninterrupted render bit for bit.
    """
    killed, whole = tmp_path / "killed", tmp_path / "whole"
    cmd = [sys.executable, "-m", "framestyle", "stylise", str(clip), "-q", *options, "--out"]
    env = {**os.environ, "PYTHONPATH": str(ROOT)}
    proc = subprocess.Popen([*cmd, str(killed)], env=env, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE)
    deadline, done = time.time() + 300, 0
    while time.time() < deadline and done < 4 and proc.poll() is None:
        done = len(store.Store(killed).finished())
        time.sleep(0.05)
    os.kill(proc.pid, signal.SIGKILL)
    proc.wait()
    finished = store.Store(killed).finished()
    assert 4 <= len(finished) < 10, "the kill should land inside shot 1"
    for path in killed.glob("*.png"):
        assert cv2.imread(str(path)) is not None, f"{path.name} is not a valid PNG"
    stamps = {name: (killed / name).stat().st_mtime_ns for name in finished}

    rerun = subprocess.run([*cmd, str(killed)], env=env, capture_output=True, text=True, timeout=600)
    assert rerun.returncode == 0, rerun.stderr
    assert {name: (killed / name).stat().st_mtime_ns for name in finished} == stamps
    log = (killed / "render.log").read_text()
    assert "resuming" in log
    continued = [line for line in log.splitlines() if "shot 1: continued at" in line]
    assert len(continued) == 1 and f"{len(finished)} of its frames done before" in continued[0], log
    for name in finished:  # each finished frame was solved exactly once across both runs
        assert log.count(f"frame {name} ") == 1

    subprocess.run([*cmd, str(whole)], env=env, check=True, timeout=600)
    def pngs(folder):
        return {p.name: p.read_bytes() for p in sorted(folder.glob("*.png"))}
    assert len(pngs(killed)) == 10
    assert pngs(killed) == pngs(whole)  # bit-identical to an uninterrupted run
