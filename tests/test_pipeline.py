"""The render loop: one frame per input frame, shots restart the chain, resume is exact."""

import json
import shutil
import os
import subprocess
import sys
from pathlib import Path

import cv2
import numpy as np
import pytest
import torch

from framestyle import io, store
from framestyle.errors import FramestyleError
from framestyle.imaging import resize
from framestyle.motion import FlowPair
from framestyle.style.look import build_look
from framestyle.style.network import load_network
from framestyle.pipeline import render, solver_params, stylise
from framestyle.qc.stability import flow_warping_error

from conftest import STYLE, fast_settings, kill_and_resume


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


def test_manifest_records_settings_shots_and_every_frame(full_render, small_clip):
    out, _, _ = full_render
    manifest = json.loads((out / store.MANIFEST).read_text())
    assert manifest["shots"] == [{"shot": 1, "start": 0, "end": 9}, {"shot": 2, "start": 10, "end": 19}]
    assert len(store.Store(out).finished()) == 20
    assert manifest["settings"] == fast_settings().to_dict()
    assert manifest["inputs"]["input"] == str(small_clip.resolve())
    assert (out / "render.log").read_text().count("shot 2 (11-20) done") == 1
    assert not any(out.rglob("*.npy"))  # the kept state goes when its shot is done


def test_each_shot_starts_fresh_at_a_cut(full_render, small_clip):
    # The first frame of shot 2 must equal that frame stylised on its own: nothing of shot 1's
    # strokes is carried across the cut.
    out, _, _ = full_render
    settings = fast_settings()
    source = io.open_source(small_clip)
    look = build_look(load_network(settings.network), settings)
    content = resize(io.read_frame(source, 10), (128, 72))
    image, _ = stylise(look, content, 10, [], solver_params(settings), settings.seed)  # a shot's first frame
    alone = np.round(image * 255).astype(np.uint8)
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
    with pytest.raises(FramestyleError, match=r"input frames changed since this render started \(take_001.png\); "):
        render(clip, out, fast_settings(), shots="2")
    (clip / "take_020.png").unlink()  # a frame gone too: each is named, the first of them
    with pytest.raises(FramestyleError, match=r"input frames changed .* \(take_001.png and 1 more\)"):
        render(clip, out, fast_settings(), shots="2")


def test_a_changed_style_image_or_shot_look_is_refused_by_name(small_clip, tmp_path):
    paint = tmp_path / "paint.png"
    paint.write_bytes(STYLE.read_bytes())
    out = tmp_path / "out"
    settings = fast_settings(styles=(str(paint),), iterations=2, shot_looks={"2": {"strength": 0.5}})
    render(small_clip, out, settings, shots="1")
    with pytest.raises(FramestyleError, match=r"different settings \(\[shots.2\] strength\)"):
        render(small_clip, out, fast_settings(styles=(str(paint),), iterations=2, shot_looks={"2": {"strength": 0.4}}))
    cv2.imwrite(str(paint), 255 - cv2.imread(str(paint)))
    with pytest.raises(FramestyleError, match=rf"style image\(s\) changed since this render started \({paint}\)"):
        render(small_clip, out, settings)


def test_another_process_rendering_here_with_the_cores_taken_is_said(small_clip, tmp_path):
    # Two processes with as many torch threads as cores slow each other several times over (measured
    # on 2 cores: 1.1-2.7 s a frame where one took 0.1; common practice to give each cores / processes)
    out = tmp_path / "o"
    render(small_clip, out, fast_settings(iterations=2), shots="1")
    holder = subprocess.Popen([sys.executable, "-c", "import sys, time\nfrom framestyle.store import Store\n"
                               "with Store(sys.argv[1]).shot(2, wait=False) as work:\n"
                               "    print('held', flush=True)\n    time.sleep(120)\n", str(out)],
                              stdout=subprocess.PIPE, text=True, cwd=Path(__file__).parents[1])
    threads = torch.get_num_threads()
    try:
        assert holder.stdout.readline().strip() == "held"
        torch.set_num_threads(os.cpu_count())
        events = []
        render(small_clip, out, fast_settings(iterations=2), shots="1", progress=lambda e, **i: events.append((e, i)))
    finally:
        torch.set_num_threads(threads)
        holder.kill()
        holder.wait()
    said = [i["message"] for e, i in events if e == "warning"]
    assert [m for m in said if f"(pid {holder.pid})" in m and "slow each other several times over: give each "
            f"--threads {max(1, os.cpu_count() // 2)}" in m], said
    assert f"(pid {holder.pid})" in (out / "render.log").read_text()


def test_shots_can_be_rendered_separately_and_give_the_same_frames(full_render, small_clip, tmp_path):
    out, _, _ = full_render
    part = tmp_path / "parts"
    render(small_clip, part, fast_settings(), shots="2")
    assert len(_pngs(part)) == 10
    render(small_clip, part, fast_settings(), shots="1")
    assert _pngs(part) == _pngs(out)


def test_sigkill_mid_shot_then_rerun_finishes_with_nothing_lost_or_recomputed(small_clip, tmp_path):
    kill_and_resume(small_clip, tmp_path, ["--style", str(STYLE), "--width", "128", "--iterations", "25",
                                           "--tolerance", "0", "--shots", "1"])


def test_each_frame_pair_flows_are_computed_once_and_shared_with_the_warping_error(small_clip, tmp_path, monkeypatch):
    # Every warm-started frame needs the flow both ways to each earlier frame its temporal
    # loss ties it to (long_term (1, 4): frames 1 and 4 back, within its shot); the in-render
    # warping error of the frame and its predecessor reuses the pair for offset 1.
    import framestyle.motion as motion

    calls = []
    real = motion.compute_flow
    monkeypatch.setattr(motion, "compute_flow", lambda *a, **k: calls.append(1) or real(*a, **k))
    result = render(small_clip, tmp_path / "out", fast_settings(iterations=2), shots="1")
    pairs = sum(1 for k in range(10) for j in (1, 4) if k - j >= 0)  # shot 1 is frames 0..9
    assert len(calls) == 2 * pairs
    assert result.shots[0].warp_error_pairs == 9


@pytest.mark.parametrize("run", [1, 2, 3])
def test_a_cutaway_of_a_few_frames_is_solved_apart_and_the_chain_goes_on_past_it(small_clip, tmp_path, run):
    # A music video's flash cut: one to three frames of another picture inside a shot, the shot
    # going on after it. Warm-started from the frame before, one such frame came out as a ghost
    # of that frame, and the frame after it, warm-started from it, carried its paint on through
    # the shot; after two or three, the chain started again, and the shot's paint with it.
    clip = tmp_path / "clip"
    clip.mkdir()
    for k in range(1, 11):  # take_005 .. are frames 15 .. of the clip's other shot
        shutil.copy(small_clip / f"take_{k + 10 if 5 <= k < 5 + run else k:03d}.png", clip / f"take_{k:03d}.png")
    listing = tmp_path / "one_shot.txt"
    listing.write_text("1\n")  # no detection: the render's own check meets the cutaway
    out = tmp_path / "out"
    settings = fast_settings(iterations=20)
    render(clip, out, settings, shot_file=listing)
    log = (out / store.LOG).read_text()
    cutaway, after = [f"take_{k:03d}.png" for k in range(5, 5 + run)], f"take_{5 + run:03d}.png"
    assert all(f"{name}: no optical-flow correspondence with the frame before it, but the picture comes back" in log
               for name in cutaway)
    entries = store.Store(out).finished()
    assert not any(e["fresh"] for e in entries.values())  # one chain through the shot
    assert [name for name, e in entries.items() if e["odd"]] == cutaway
    look, source = build_look(load_network(settings.network), settings), io.open_source(clip)
    working = lambda k: resize(io.read_frame(source, k - 1), (128, 72))  # take_k's working frame
    alone, _ = stylise(look, working(5), 4, [], solver_params(settings), settings.seed)
    frame = lambda k: cv2.imread(str(out / f"take_{k:03d}.png"))[..., ::-1].astype(np.float32)
    assert np.array_equal(np.round(alone * 255), frame(5))  # the cutaway's first frame: on its own
    assert all(entries[name]["warp_error"] is not None for name in cutaway[1:])  # the rest go on from it
    # the frame after it goes on from the frame before it: its paint stays on the picture as the
    # picture moved since, where a frame started afresh (the chain after 2-3 frames, before) puts
    # its strokes elsewhere: warping error against take_004 0.0006-0.0009, afresh 0.030-0.031
    afresh, _ = stylise(look, working(5 + run), 4 + run, [], solver_params(settings), settings.seed)
    flows = FlowPair.between(working(5 + run), working(4))
    continued = flow_warping_error(frame(4) / 255, frame(5 + run) / 255, flows)
    assert continued == pytest.approx(entries[after]["warp_error"], rel=0.05, abs=1e-4)  # measured against take_004
    assert continued < 0.1 * flow_warping_error(frame(4) / 255, afresh, flows)

    def stop_after(name):  # a kill right after ``name`` was delivered
        def progress(event, **info):
            if event == "frame" and info["index"] == int(name[5:8]) - 1:
                raise KeyboardInterrupt
        return progress

    for name in [*cutaway, after]:  # resumed inside the cutaway, after it, and after the frame after it
        again = tmp_path / f"again_{name}"
        with pytest.raises(KeyboardInterrupt):
            render(clip, again, settings, shot_file=listing, progress=stop_after(name))
        assert len(store.Store(again).finished()) == int(name[5:8])
        render(clip, again, settings, shot_file=listing)
        for k in range(1, 11):
            assert (again / f"take_{k:03d}.png").read_bytes() == (out / f"take_{k:03d}.png").read_bytes(), (name, k)


def test_a_cutaway_longer_than_an_odd_run_is_two_missed_cuts(small_clip, tmp_path):
    clip = tmp_path / "clip"
    clip.mkdir()
    for k in range(1, 11):  # four frames of the other shot: more than ODD_RUN
        shutil.copy(small_clip / f"take_{k + 10 if 5 <= k < 9 else k:03d}.png", clip / f"take_{k:03d}.png")
    listing = tmp_path / "one_shot.txt"
    listing.write_text("1\n")
    render(clip, tmp_path / "out", fast_settings(iterations=2), shot_file=listing)
    entries = store.Store(tmp_path / "out").finished()
    assert [name for name, e in entries.items() if e["fresh"]] == ["take_005.png", "take_009.png"]
    assert not any(e["odd"] for e in entries.values())


def test_a_cut_missing_from_the_shot_list_starts_fresh_where_the_flow_finds_no_correspondence(small_clip, tmp_path):
    # One shot over the whole clip hides the cut at take_011: the forward-backward check
    # marks nearly all of that frame unreliable, and the render starts it fresh (as a shot's
    # first frame), logging it.
    listing = tmp_path / "one_shot.txt"
    listing.write_text("1\n")
    out = tmp_path / "out"
    render(small_clip, out, fast_settings(), shot_file=listing)
    entries = store.Store(out).finished()
    assert [name for name, e in entries.items() if e["fresh"]] == ["take_011.png"]
    assert "take_011.png: no optical-flow correspondence" in (out / store.LOG).read_text()
    settings = fast_settings()
    look = build_look(load_network(settings.network), settings)
    content = resize(io.read_frame(io.open_source(small_clip), 10), (128, 72))
    image, _ = stylise(look, content, 10, [], solver_params(settings), settings.seed)
    assert np.array_equal(np.round(image * 255).astype(np.uint8), cv2.imread(str(out / "take_011.png"))[..., ::-1])
