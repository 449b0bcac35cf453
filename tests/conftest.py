"""Shared fixtures: a small two-shot clip cut from the bundled sample, and fast settings."""

from pathlib import Path

import cv2
import pytest

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
