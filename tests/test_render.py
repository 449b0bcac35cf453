"""The render loop: one frame per input frame, shots restart the chain, resume is exact."""

import json
import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import cv2
import numpy as np
import pytest

from framestyle import checkpoint, frames
from framestyle.errors import FramestyleError
from framestyle.render import fresh_problem, prepare_look, render, resize, start_noise, to_array
from framestyle.solver import solve

from conftest import ROOT, STYLE, fast_settings


def _pngs(folder: Path) -> dict[str, bytes]:
    return {p.name: p.read_bytes() for p in sorted(folder.glob("take_*.png"))}


@pytest.fixture(scope="module")
def full_render(small_clip, tmp_path_factory):
    out = tmp_path_factory.mktemp("full")
    events = []
    result = render(small_clip, out, fast_settings(), progress=lambda e, **i: events.append((e, i)))
    return out, result, events


def test_writes_one_png_per_input_frame_named_after_the_input(full_render, small_clip):
    out, result, _ = full_render
    assert sorted(p.name for p in result.frames) == sorted(p.name for p in small_clip.iterdir())
    for path in result.frames:
        image = cv2.imread(str(path))
        assert image is not None and image.shape == (72, 128, 3)


def test_manifest_records_settings_shots_and_every_frame(full_render):
    out, _, _ = full_render
    manifest = json.loads((out / checkpoint.MANIFEST).read_text())
    assert manifest["shots"] == [{"shot": 1, "start": 0, "end": 9}, {"shot": 2, "start": 10, "end": 19}]
    assert len(manifest["frames"]) == 20
    assert manifest["settings_hash"] == fast_settings().digest()
    assert (out / "settings.json").exists() and (out / "render.log").read_text().count("shot 2 done") == 1
    assert not (out / ".state").exists() or not any((out / ".state").rglob("*.npy"))


def test_each_shot_starts_fresh_at_a_cut(full_render, small_clip):
    # The first frame of shot 2 must equal that frame stylised on its own: nothing of shot 1's
    # strokes is carried across the cut.
    out, _, _ = full_render
    settings = fast_settings()
    source = frames.open_source(small_clip)
    look = prepare_look(settings, (128, 72))
    content = resize(frames.read_frame(source, 10), (128, 72))
    image, _ = solve(look.net, fresh_problem(content, start_noise((1, 3, 72, 128), settings.seed, 10)),
                     look.style, settings)
    alone = np.round(to_array(image) * 255).astype(np.uint8)
    rendered = cv2.imread(str(out / "take_011.png"))[..., ::-1]
    assert np.array_equal(alone, rendered)


def test_rerunning_a_finished_render_recomputes_nothing(full_render, small_clip):
    out, _, _ = full_render
    before = {p.name: p.stat().st_mtime_ns for p in out.glob("take_*.png")}
    events = []
    render(small_clip, out, fast_settings(), progress=lambda e, **i: events.append((e, i)))
    assert not [i for e, i in events if e == "frame" and not i.get("skipped")]
    assert {p.name: p.stat().st_mtime_ns for p in out.glob("take_*.png")} == before


def test_a_changed_setting_is_refused_by_name_and_restart_starts_over(full_render, small_clip, tmp_path):
    out, _, _ = full_render
    with pytest.raises(FramestyleError, match="style_weight"):
        render(small_clip, out, fast_settings(style_weight=99.0))
    copy = tmp_path / "copy"
    render(small_clip, copy, fast_settings(), shots="2")
    result = render(small_clip, copy, fast_settings(iterations=3), restart=True, shots="1")
    assert len(result.frames) == 10  # shot 2's frames from the old settings are gone


def test_a_changed_input_is_refused(small_clip, tmp_path):
    clip = tmp_path / "clip"
    clip.mkdir()
    for p in small_clip.iterdir():
        (clip / p.name).write_bytes(p.read_bytes())
    out = tmp_path / "out"
    render(clip, out, fast_settings(), shots="2")
    image = cv2.imread(str(clip / "take_001.png"))
    cv2.imwrite(str(clip / "take_001.png"), 255 - image)
    with pytest.raises(FramestyleError, match="input frames changed"):
        render(clip, out, fast_settings(), shots="2")


def test_shots_can_be_rendered_separately_and_give_the_same_frames(full_render, small_clip, tmp_path):
    out, _, _ = full_render
    part = tmp_path / "parts"
    render(small_clip, part, fast_settings(), shots="2")
    assert len(_pngs(part)) == 10
    render(small_clip, part, fast_settings(), shots="1")
    assert _pngs(part) == _pngs(out)


def test_a_live_lock_refuses_a_second_render_and_a_stale_one_is_taken_over(small_clip, tmp_path):
    out = tmp_path / "locked"
    out.mkdir()
    (out / ".lock").write_text(json.dumps({"pid": os.getpid(), "host": os.uname().nodename}))
    with pytest.raises(FramestyleError, match="another render"):
        render(small_clip, out, fast_settings(), shots="2")
    dead = subprocess.Popen([sys.executable, "-c", "pass"])
    dead.wait()
    (out / ".lock").write_text(json.dumps({"pid": dead.pid, "host": os.uname().nodename}))
    render(small_clip, out, fast_settings(), shots="2")
    assert not (out / ".lock").exists()


def test_sigkill_mid_shot_then_rerun_finishes_with_nothing_lost_or_recomputed(small_clip, tmp_path):
    slow = ["--width", "128", "--iterations", "25", "--tolerance", "0", "--shots", "1"]
    cmd = [sys.executable, "-m", "framestyle", "stylize", str(small_clip), "--style", str(STYLE),
           "--out", str(tmp_path / "killed"), "-q", *slow]
    env = {**os.environ, "PYTHONPATH": str(ROOT)}
    proc = subprocess.Popen(cmd, env=env, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE)
    manifest = tmp_path / "killed" / checkpoint.MANIFEST
    deadline = time.time() + 240
    while time.time() < deadline:
        try:
            done = len(json.loads(manifest.read_text())["frames"])
        except (OSError, ValueError):
            done = 0
        if done >= 4:
            break
        time.sleep(0.05)
    os.kill(proc.pid, signal.SIGKILL)
    proc.wait()
    killed = tmp_path / "killed"
    finished = json.loads(manifest.read_text())["frames"]
    assert 4 <= len(finished) < 10, "the kill should land inside shot 1"
    for path in killed.glob("*.png"):
        assert cv2.imread(str(path)) is not None, f"{path.name} is not a valid PNG"
    stamps = {name: (killed / name).stat().st_mtime_ns for name in finished}

    rerun = subprocess.run(cmd, env=env, capture_output=True, text=True, timeout=600)
    assert rerun.returncode == 0, rerun.stderr
    assert {name: (killed / name).stat().st_mtime_ns for name in finished} == stamps
    log = (killed / "render.log").read_text()
    assert "resuming" in log
    for name in finished:  # each finished frame was solved exactly once across both runs
        assert log.count(f"frame {name} ") == 1

    whole = tmp_path / "whole"
    subprocess.run([*cmd[:8], str(whole), "-q", *slow], env=env, check=True, timeout=600)
    assert _pngs(killed) == _pngs(whole)  # bit-identical to an uninterrupted run
