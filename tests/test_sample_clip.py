"""The bundled demo clip is what sample_clip/README.md promises, and make_sample.py rebuilds it."""

import struct
import subprocess
import sys
from pathlib import Path

import cv2
import numpy as np
import pytest

SAMPLE = Path(__file__).resolve().parent.parent / "sample_clip"
FRAME_NAMES = [f"drift_{i:04d}.png" for i in range(1, 49)]
CUT_AFTER = 28  # last frame of shot 1


def _png_header(path: Path) -> tuple[int, int, int, int]:
    """(width, height, bit depth, colour type) from the IHDR chunk.

    PNG specification (W3C, 2nd ed. / ISO/IEC 15948): 8-byte signature, then the IHDR chunk
    (4-byte length, b"IHDR", width and height as big-endian uint32, bit depth, colour type);
    colour type 2 is truecolour RGB.
    """
    head = path.read_bytes()[:26]
    assert head[:8] == b"\x89PNG\r\n\x1a\n", f"{path.name} is not a PNG"
    assert head[12:16] == b"IHDR"
    width, height, depth, colour = struct.unpack(">IIBB", head[16:26])
    return width, height, depth, colour


def _read_rgb(path: Path) -> np.ndarray:
    img = cv2.imread(str(path), cv2.IMREAD_UNCHANGED)
    assert img is not None, f"cannot decode {path}"
    return img


def _histogram(img: np.ndarray, bins: int = 32) -> np.ndarray:
    per_channel = [np.histogram(img[..., c], bins=bins, range=(0, 256))[0] for c in range(3)]
    return np.concatenate(per_channel) / img[..., 0].size


@pytest.fixture(scope="module")
def frames() -> list[np.ndarray]:
    return [_read_rgb(SAMPLE / "frames" / name) for name in FRAME_NAMES]


def test_frames_folder_holds_exactly_48_numbered_pngs():
    assert sorted(p.name for p in (SAMPLE / "frames").iterdir()) == FRAME_NAMES


@pytest.mark.parametrize("name", FRAME_NAMES)
def test_each_frame_is_an_8bit_rgb_png_of_320x180(name):
    assert _png_header(SAMPLE / "frames" / name) == (320, 180, 8, 2)


@pytest.mark.parametrize("name", ["style.png", "style_ink.png", "style_mosaic.png"])
def test_style_images_are_8bit_rgb_512_square(name):
    assert _png_header(SAMPLE / name) == (512, 512, 8, 2)
    assert _read_rgb(SAMPLE / name).shape == (512, 512, 3)


def test_sample_folder_is_under_3_5_megabytes():
    # 48 frames (about 2.2 MB) and three style images (about 0.9 MB) stay light to clone.
    files = [p for p in SAMPLE.rglob("*") if p.is_file() and "__pycache__" not in p.parts]
    assert sum(p.stat().st_size for p in files) < 3_500_000


def test_readme_states_the_regenerate_command():
    assert "python sample_clip/make_sample.py" in (SAMPLE / "README.md").read_text()


def test_the_only_hard_cut_is_between_frames_28_and_29(frames):
    # Shot-boundary detection by colour-histogram difference (common practice): the cut pair
    # must stand out far above every within-shot pair.
    hists = [_histogram(f) for f in frames]
    diffs = np.array([np.abs(a - b).sum() for a, b in zip(hists, hists[1:])])
    cut = CUT_AFTER - 1  # index of the pair (28, 29)
    others = np.delete(diffs, cut)
    assert int(np.argmax(diffs)) == cut
    assert diffs[cut] > 10 * others.max()


def test_camera_moves_a_little_every_frame_within_each_shot(frames):
    mad = np.array([np.abs(a.astype(np.int16) - b).mean() for a, b in zip(frames, frames[1:])])
    within = np.delete(mad, CUT_AFTER - 1)
    assert within.min() > 1.0  # something moves in every frame
    assert within.max() < 15.0  # ...but only by a few pixels (mean absolute difference in levels)
    assert mad[CUT_AFTER - 1] > 4 * within.max()


def test_make_sample_reproduces_the_committed_files_exactly(tmp_path):
    subprocess.run(
        [sys.executable, str(SAMPLE / "make_sample.py"), "--out", str(tmp_path)],
        check=True,
        capture_output=True,
        timeout=300,
    )
    made = sorted(p.relative_to(tmp_path) for p in tmp_path.rglob("*.png"))
    committed = sorted(p.relative_to(SAMPLE) for p in SAMPLE.rglob("*.png"))
    assert made == committed
    for rel in committed:  # decoded pixels, so a different zlib build cannot break the check
        # OpenCV picks its SIMD code by CPU, and its interpolation rounds differently between
        # machines by one level in a few pixels (measured on two machines: up to 19 of a frame's
        # 172 800 values); a change of the generator moves far more, by more.
        made_rgb, committed_rgb = _read_rgb(tmp_path / rel).astype(int), _read_rgb(SAMPLE / rel).astype(int)
        assert made_rgb.shape == committed_rgb.shape, rel
        difference = np.abs(made_rgb - committed_rgb)
        assert difference.max() <= 1 and np.count_nonzero(difference) <= 1e-3 * difference.size, rel


def test_the_ball_in_shot_2_passes_behind_the_foreground_post(monkeypatch):
    # The clip must exercise occlusion: the rolling ball starts and ends in view and in
    # between goes behind the nearest layer (the post), so a renderer's occlusion masks
    # have something to find. Checked on the generator's own layers, in frame coordinates.
    monkeypatch.syspath_prepend(str(SAMPLE))
    from layers import H, W
    from make_sample import SHOTS
    from market import market_shot

    (seed,) = [seed for make, seed in SHOTS if make is market_shot]
    layers, cam = market_shot(np.random.default_rng(seed))
    (ball,) = [layer for layer in layers if layer.spin]
    post = max(layers, key=lambda layer: layer.parallax)

    def alpha(layer, t):
        return cv2.warpAffine(layer.rgba[..., 3], layer.warp_matrix(cam, t), (W, H))

    hidden = []
    for t in range(len(cam.pan_x)):
        seen = alpha(ball, t)
        hidden.append((seen * alpha(post, t)).sum() / seen.sum())
    assert len(hidden) == 20
    assert hidden[0] < 0.01 and hidden[-1] < 0.01
    assert max(hidden) > 0.2
