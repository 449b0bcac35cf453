"""The output store: survives any kill, any leftover and any restart; several processes share it.

The crash and I/O-error loops follow SQLite's method (sqlite.org, "How SQLite Is Tested":
crash testing and I/O error testing): count every file-system write of a small render, then
stop (or fail) the render at each one in turn and check that the next run finishes it with
frames equal, bit for bit, to an uninterrupted render's.
"""

import json
import os
import shutil
import subprocess
import sys
import threading
from pathlib import Path

import cv2
import imageio_ffmpeg
import pytest
import torch

from framestyle import pipeline, store

from conftest import ROOT, STYLE, fast_settings
from faults import EACCES, ENOSPC, Hook, frames_of, in_groups, prepare_parent, run_all, run_cli, start_cli


@pytest.fixture(scope="module")
def clip(small_clip, tmp_path_factory) -> tuple[Path, Path]:
    """A 4-frame H.264 clip (so the render also writes a video) and its two-shot list: two frames a
    shot, a shot's first frame and a warm-started one, as few as show every kind of write (each
    write of a fault loop costs a render)."""
    folder = tmp_path_factory.mktemp("video")
    video = folder / "cut.mp4"
    frames = [str(small_clip / f"take_{n:03d}.png") for n in range(9, 13)]  # the cut is at take_011
    listing = folder / "frames.txt"
    listing.write_text("".join(f"file '{f}'\nduration 0.04\n" for f in frames))
    subprocess.run([imageio_ffmpeg.get_ffmpeg_exe(), "-v", "error", "-f", "concat", "-safe", "0", "-i", str(listing),
                    "-frames:v", "4", "-r", "25", "-c:v", "libx264", "-pix_fmt", "yuv420p", str(video)], check=True)
    shots = folder / "shots.txt"
    shots.write_text("0\n2\n")
    prepare_parent(_args((video, shots), folder / "warm_up"))
    return video, shots


def _args(clip, out, *extra):
    video, shots = clip
    return ["stylise", video, "--style", STYLE, "--out", out, "--width", "128", "--iterations", "2",
            "--tolerance", "0", "--shot-list", shots, "-q", *extra]


@pytest.fixture(scope="module")
def reference(clip, tmp_path_factory):
    """An uninterrupted render, and how many writes it makes."""
    out = tmp_path_factory.mktemp("reference") / "out"
    code, err, writes = run_cli(_args(clip, out))
    assert code == 0, err
    assert len(frames_of(out)) == 4 and (out / "cut_framestyle.mp4").exists()
    return out, writes


def _finished_stamps(out: Path) -> dict[str, int]:
    return {name: (out / name).stat().st_mtime_ns for name in store.Store(out).finished()}


def _no_leftovers(out: Path) -> None:
    assert not [p for p in out.rglob("*") if ".tmp-" in p.name], "temporary files left behind"
    assert not list(out.rglob("*.npy")), "kept state left behind"


def test_a_crash_at_every_write_then_the_same_command_finishes_bit_identical(clip, reference, tmp_path):
    ref, writes = reference
    assert writes > 20  # frames, state, records, manifest, log lines, video
    for group in in_groups(list(range(1, writes + 1))):  # a few crashes at once, each in its own folder
        outs = {n: tmp_path / f"crash_{n}" for n in group}
        for n, (code, err, _) in zip(group, run_all([(_args(clip, outs[n]), Hook(n)) for n in group])):
            assert code == 99, f"write {n}: {err}"
        stamps = {n: _finished_stamps(out) if (out / store.MANIFEST).exists() else {} for n, out in outs.items()}
        for n, (code, err, _) in zip(group, run_all([(_args(clip, outs[n]), None) for n in group])):
            out = outs[n]
            assert code == 0 and "Traceback" not in err, f"after a crash at write {n}: {err}"
            assert frames_of(out) == frames_of(ref), f"after a crash at write {n}"
            assert (out / "cut_framestyle.mp4").read_bytes() == (ref / "cut_framestyle.mp4").read_bytes()
            finished = {k: v for k, v in _finished_stamps(out).items() if k in stamps[n]}
            assert finished == stamps[n], "a finished frame was rewritten"
            _no_leftovers(out)
            shutil.rmtree(out)


def test_an_io_error_at_every_write_is_one_line_and_loses_nothing(clip, reference, tmp_path):
    # SQLite's I/O-error testing: every write fails once, disk full (ENOSPC) and permission
    # denied (EACCES) in turn, so each kind of write (they recur per frame) meets both errors
    # in one pass over the render; two full passes would double the suite's slowest test.
    ref, writes = reference
    for group in in_groups(list(range(1, writes + 1))):
        faults = {n: ENOSPC if n % 2 else EACCES for n in group}
        outs = {n: tmp_path / f"fault_{n}" for n in group}
        for n, (code, err, _) in zip(group, run_all([(_args(clip, outs[n]), Hook(n, faults[n])) for n in group])):
            lines = err.strip().splitlines()
            assert code == 2 and len(lines) == 1 and "Traceback" not in err, f"write {n}: {err}"
            assert os.strerror(faults[n]) in lines[0] and str(outs[n]) in lines[0]
            for name in store.Store(outs[n]).finished():  # what was finished is intact
                assert (outs[n] / name).read_bytes() == (ref / name).read_bytes()
        for n, (code, err, _) in zip(group, run_all([(_args(clip, outs[n]), None) for n in group])):
            assert code == 0, f"after an I/O error at write {n}: {err}"
            assert frames_of(outs[n]) == frames_of(ref)
            _no_leftovers(outs[n])
            shutil.rmtree(outs[n])


def test_a_crash_at_every_write_of_a_restart_leaves_nothing_of_the_old_render(clip, reference, tmp_path):
    ref, _ = reference
    new_ref = tmp_path / "new_ref"
    assert run_cli(_args(clip, new_ref, "--iterations", "3"))[0] == 0
    base = tmp_path / "base"
    shutil.copytree(ref, base)
    (base / store.PREVIEW).mkdir()
    (base / store.PREVIEW / "contact_shot001.png").write_bytes(b"an old preview")
    _, _, writes = run_cli(_args(clip, tmp_path / "count", "--iterations", "3", "--restart"))
    # every other write: the restart's moves and the new render
    for group in in_groups(list(range(1, writes + 1, 2))):
        outs = {n: tmp_path / f"restart_{n}" for n in group}
        for out in outs.values():
            shutil.copytree(base, out)
        restart = {n: _args(clip, outs[n], "--iterations", "3", "--restart") for n in group}
        for code, err, _ in run_all([(restart[n], Hook(n)) for n in group]):
            assert code == 99, err
        # the same options, without --restart
        again = run_all([(_args(clip, outs[n], "--iterations", "3"), None) for n in group])
        for n, (code, err, _) in zip(group, again):
            lines = err.strip().splitlines()
            if code == 2:  # killed before the old manifest went: refused by name, nothing touched
                assert len(lines) == 1 and "different settings (iterations)" in lines[0]
                code, err, _ = run_cli(restart[n])
            assert code == 0, err
            out = outs[n]
            assert frames_of(out) == frames_of(new_ref)
            assert (out / "cut_framestyle.mp4").read_bytes() == (new_ref / "cut_framestyle.mp4").read_bytes()
            assert not (out / store.PREVIEW).exists()
            _no_leftovers(out)
            shutil.rmtree(out)


def test_restart_works_when_the_manifest_is_unreadable(clip, reference, tmp_path):
    ref, _ = reference
    out = tmp_path / "out"
    shutil.copytree(ref, out)
    (out / store.MANIFEST).write_text("{ not json")
    code, err, _ = run_cli(_args(clip, out))
    assert code == 2 and "unreadable manifest" in err and "--restart" in err
    (out / store.MANIFEST).write_text(json.dumps({"format": store.FORMAT, "shots": "1-4"}))  # valid JSON, no render
    code, err, _ = run_cli(_args(clip, out))
    assert code == 2 and "damaged manifest (no valid settings, inputs, shot_list, shots)" in err, err
    assert len(err.strip().splitlines()) == 1
    assert run_cli(_args(clip, out, "--restart"))[0] == 0
    assert frames_of(out) == frames_of(ref)


def test_planted_leftovers_are_cleaned_and_the_render_finishes(clip, reference, tmp_path):
    ref, writes = reference
    out = tmp_path / "out"
    code, _, _ = run_cli(_args(clip, out), Hook(writes // 3))  # killed inside shot 1
    assert code == 99
    state = out / ".framestyle" / "state" / "shot_001"
    kept = sorted(state.glob("*.npy"))
    assert kept, "the kill should leave kept state"
    (state / f".{kept[-1].name}.tmp-x1y2z3.npy").write_bytes(b"\x93NUMPY half")  # a torn temp beside state
    kept[-1].write_bytes(kept[-1].read_bytes()[:40])  # a truncated state file
    (out / ".frame_000003.png.tmp-q9w8e7.png").write_bytes(b"")  # a zero-byte temp beside the frames
    code, err, _ = run_cli(_args(clip, out))
    assert code == 0 and "Traceback" not in err, err
    assert frames_of(out) == frames_of(ref)
    _no_leftovers(out)


def test_a_missing_or_damaged_finished_frame_is_rendered_again(clip, reference, tmp_path):
    ref, _ = reference
    out = tmp_path / "out"
    shutil.copytree(ref, out)
    (out / "frame_000001.png").unlink()
    (out / "frame_000003.png").write_bytes(b"not a png any more")
    code, err, _ = run_cli(_args(clip, out))
    assert code == 0, err
    assert "frame_000001.png is recorded but missing" in err and "frame_000003.png is recorded but unreadable" in err
    assert "not in its record" not in err  # the unreadable frame is said once
    assert frames_of(out) == frames_of(ref)


def test_two_processes_on_one_folder_each_shot_is_rendered_by_exactly_one_of_them(clip, reference, tmp_path):
    # 50 races: both processes want every shot; each takes the shots it can lock first and
    # waits for the others, so both finish and no frame is solved twice.
    ref, _ = reference
    for k in range(50):
        out = tmp_path / f"race_{k}"
        first, second = start_cli(_args(clip, out)), start_cli(_args(clip, out))
        results = [first.wait(), second.wait()]
        assert [code for code, _, _ in results] == [0, 0], results
        log = (out / store.LOG).read_text()
        for name in frames_of(ref):
            assert log.count(f"frame {name} ") == 1, f"race {k}: {name} solved more than once"
        assert frames_of(out) == frames_of(ref)
        shutil.rmtree(out)


def test_two_framestyle_processes_render_different_shots_of_one_folder_at_once(small_clip, tmp_path):
    # Separate interpreters, as on a render farm: the result equals a one-process render.
    env = {**os.environ, "PYTHONPATH": str(ROOT)}
    common = [sys.executable, "-m", "framestyle", "stylise", str(small_clip), "--style", str(STYLE), "-q",
              "--width", "128", "--iterations", "4", "--threads", "1"]  # one thread: two processes share two cores
    whole, shared = tmp_path / "whole", tmp_path / "shared"
    procs = [subprocess.Popen([*common, "--out", str(shared), "--shots", n], env=env, stderr=subprocess.PIPE)
             for n in ("1", "2")]
    for proc in procs:
        assert proc.wait(timeout=600) == 0, proc.stderr.read().decode()
    subprocess.run([*common, "--out", str(whole)], env=env, check=True, timeout=600)
    pngs = sorted(p.name for p in whole.glob("take_*.png"))
    assert len(pngs) == 20
    for name in pngs:
        assert (shared / name).read_bytes() == (whole / name).read_bytes()


def test_resume_from_another_folder_uses_the_absolute_input_path(small_clip, tmp_path, monkeypatch):
    out = tmp_path / "out"
    monkeypatch.chdir(small_clip.parent)
    pipeline.render(Path(small_clip.name), out, fast_settings(iterations=2), shots="1")
    monkeypatch.chdir(tmp_path)
    from typer.testing import CliRunner

    from framestyle.cli import app

    result = CliRunner().invoke(app, ["resume", str(out), "--shots", "2", "-q"])
    assert result.exit_code == 0, result.stderr
    assert len(store.Store(out).finished()) == 20


def test_a_shot_list_is_the_same_by_its_cut_and_a_changed_one_is_refused_by_shot(small_clip, tmp_path):
    out = tmp_path / "out"
    listing = tmp_path / "shots.txt"
    listing.write_text("1\n11\n")  # shot starts in the clip's own frame numbers (1-20)
    pipeline.render(small_clip, out, fast_settings(iterations=2), shot_file=listing, shots="1")
    # a wrangler's sweep: a byte-identical copy elsewhere, or detection finding the same cut, was
    # refused as "another shot list", and an edited list was named but not what changed
    copy = tmp_path / "elsewhere" / "shots.txt"
    copy.parent.mkdir()
    copy.write_bytes(listing.read_bytes())
    listing.write_text("1\n6\n")  # the cut moved from frame 11 to 6
    with pytest.raises(store.FramestyleError, match=r"shots.txt cuts the clip otherwise than this render "
                                                    r"\(shot 1 frames 1-5, the render's 1-10\)"):
        pipeline.render(small_clip, out, fast_settings(iterations=2), shot_file=listing)
    pipeline.render(small_clip, out, fast_settings(iterations=2), shot_file=copy, shots="1")  # the list, moved
    assert store.Store(out).manifest()["shot_list"]["file"] == str(copy.resolve())
    pipeline.render(small_clip, out, fast_settings(iterations=2))  # detection: the same cut at frame 11
    assert len(store.Store(out).finished()) == 20
    listing.write_text("1\n11\n16\n")  # a cut added
    with pytest.raises(store.FramestyleError, match=r"cuts the clip otherwise than this render \(shot 2 frames "
                                                    r"11-15, the render's 11-20\)"):
        pipeline.render(small_clip, out, fast_settings(iterations=2), shot_file=listing)


def test_a_render_goes_on_with_its_style_image_moved_and_stops_at_another_image(small_clip, tmp_path):
    # a wrangler's sweep moved a job to another disk, style image too: the render was refused as
    # "different settings (styles)" and only --restart went on
    out, first, moved = tmp_path / "out", tmp_path / "a" / "look.png", tmp_path / "b" / "look.png"
    first.parent.mkdir()
    moved.parent.mkdir()
    shutil.copy(STYLE, first)
    pipeline.render(small_clip, out, fast_settings(iterations=2, styles=(str(first),)), shots="1")
    shutil.move(first, moved)
    pipeline.render(small_clip, out, fast_settings(iterations=2, styles=(str(moved),)))
    assert len(store.Store(out).finished()) == 20
    assert store.Store(out).manifest()["settings"]["styles"] == [str(moved)]  # resume reads it from there
    other = tmp_path / "b" / "other.png"
    cv2.imwrite(str(other), 255 - cv2.imread(str(STYLE)))
    with pytest.raises(store.FramestyleError, match="different settings \\(styles\\)"):
        pipeline.render(small_clip, out, fast_settings(iterations=2, styles=(str(other),)))


def test_a_gap_in_the_numbering_is_reported_and_starts_a_new_shot(small_clip, tmp_path):
    clip = tmp_path / "gappy"
    clip.mkdir()
    for k, p in enumerate(sorted(small_clip.glob("take_*.png"))[:8]):
        shutil.copy(p, clip / f"plate_{1001 + k + (2 if k >= 4 else 0)}.png")  # 1005 and 1006 missing
    events = []
    pipeline.render(clip, tmp_path / "out", fast_settings(iterations=2),
                    progress=lambda e, **i: events.append((e, i)))
    warnings = [i["message"] for e, i in events if e == "warning"]
    assert any("frame numbers missing (1005-1006)" in w for w in warnings)
    assert store.read_manifest(tmp_path / "out")["shots"][1]["start"] == 4


def test_progress_on_resume_starts_from_the_frames_already_done(small_clip, tmp_path):
    out = tmp_path / "out"
    pipeline.render(small_clip, out, fast_settings(iterations=2), shots="1")
    events = []
    pipeline.render(small_clip, out, fast_settings(iterations=2), progress=lambda e, **i: events.append((e, i)))
    start = next(i for e, i in events if e == "start")
    assert (start["frames"], start["done"]) == (20, 10)
    assert sum(1 for e, _ in events if e == "frame") == 10


def test_a_shot_continued_under_another_setup_says_so_and_where(small_clip, tmp_path, monkeypatch):
    # The setup (thread count, device, versions) is the shot's: each shot's record keeps the one
    # its chain started under. The render's manifest kept the planning process's, which on a
    # render farm is not what any worker computes with, and a resume compared against that.
    out = tmp_path / "out"

    def stop_after_fourth(event, **info):  # a kill after take_004.png, in shot 1
        if event == "frame" and info["index"] == 3:
            raise KeyboardInterrupt

    with pytest.raises(KeyboardInterrupt):
        pipeline.render(small_clip, out, fast_settings(iterations=2), progress=stop_after_fourth)
    threads = torch.get_num_threads()
    records = store.Store(out).records()
    assert records[1]["environment"]["torch threads"] == threads and records[1]["environment"]["device"] == "cpu"
    assert "torch threads" not in store.read_manifest(out)["environment"]  # versions only
    real = pipeline.environment
    monkeypatch.setattr(pipeline, "environment", lambda net: {**real(net), "torch threads": 99})
    events = []
    pipeline.render(small_clip, out, fast_settings(iterations=2), progress=lambda e, **i: events.append((e, i)))
    said = [i["message"] for e, i in events if e == "warning" and "under torch threads" in i["message"]]
    # shot 2 starts its chain under the new setup and keeps it: nothing to say
    assert said == [f"shot 1 continues at take_005.png under torch threads 99 (was {threads}): its frames from "
                    f"there keep the look but may place their strokes differently from the frames before"]
    assert said[0] in (out / store.LOG).read_text()
    assert store.Store(out).records()[2]["environment"]["torch threads"] == 99
    events.clear()
    summary = pipeline.render_shot(pipeline.plan_render(small_clip, out, fast_settings(iterations=2)), 1)
    assert summary.warnings == () and events == []  # a finished shot renders nothing under it


def test_a_lock_that_cannot_be_written_names_its_file_and_is_let_go(tmp_path, monkeypatch):
    lock = store.Lock(tmp_path / "locks" / "shot_001.lock", "shot 1")

    def disk_full(*_):
        raise OSError(28, "No space left on device")

    with monkeypatch.context() as patch:
        patch.setattr(os, "pwrite", disk_full)
        with pytest.raises(OSError) as error:
            lock.acquire(wait=False)
    assert error.value.filename == str(lock.path) and error.value.strerror == "No space left on device"
    assert lock.acquire(wait=False)  # nothing was left holding it
    lock.release()


def test_a_quiet_render_says_which_process_it_waits_for(small_clip, tmp_path):
    # Another process (this one) holds shot 1: a render with -q renders shot 2, then waits,
    # and says so on stderr instead of looking hung.
    out = tmp_path / "out"
    lock = store.Lock(out / ".framestyle" / "locks" / "shot_001.lock", "shot 1")
    assert lock.acquire(wait=False)
    (tmp_path / "shots.txt").write_text("1\n11\n")
    child = subprocess.Popen(
        [sys.executable, "-m", "framestyle", "stylise", str(small_clip), "--style", str(STYLE), "--out", str(out),
         "--width", "128", "--iterations", "2", "--shot-list", str(tmp_path / "shots.txt"), "-q"],
        env={**os.environ, "PYTHONPATH": str(ROOT)}, stderr=subprocess.PIPE, text=True)
    timer = threading.Timer(120, lock.release)  # a child that waits silently gets the shot after 2 minutes
    timer.start()
    line = child.stderr.readline()  # blocks until the child says something, or ends
    while line.startswith("framestyle: warning"):  # e.g. that this process holds a shot here too
        line = child.stderr.readline()
    timer.cancel()
    lock.release()  # no-op if the timer released it
    assert child.wait(timeout=300) == 0
    assert line.startswith("framestyle: waiting: shot 1 is held by pid") and str(os.getpid()) in line


def test_a_preview_takes_the_preview_lock(small_clip, tmp_path):
    out = tmp_path / "out"
    lock = store.Lock(out / ".framestyle" / "locks" / "preview.lock", "preview")
    assert lock.acquire(wait=False)
    try:
        child = subprocess.run(
            [sys.executable, "-m", "framestyle", "preview", str(small_clip), "--style", str(STYLE), "--out", str(out),
             "--every", "5", "--width", "128", "--iterations", "2", "-q"],
            env={**os.environ, "PYTHONPATH": str(ROOT)}, capture_output=True, text=True, timeout=300)
    finally:
        lock.release()
    assert child.returncode == 2 and "preview is held by pid" in child.stderr
    assert len(child.stderr.strip().splitlines()) == 1
