"""The flash check as users meet it: `framestyle flashes`, and the check every render records.

The verdicts come from W3C WCAG 2.1 SC 2.3.1 ("Three Flashes or Below Threshold") with its
definition "general flash and red flash thresholds" (and its notes: the 341×256 px 10° field
on a 1024×768 screen, the red-flash measure, the 0.1° exception for fine patterns), and from
ITU-R BT.1702 (flashes over a quarter of the screen). The analysis itself is tested frame by
frame in tests/test_flashes.py; here each synthetic case goes through the command line as a
folder of PNG frames, so the exit code a delivery script gates on is checked too.
"""

import json
import subprocess
from pathlib import Path

import cv2
import imageio_ffmpeg
import numpy as np
import pytest
from typer.testing import CliRunner

from framestyle import pipeline, store
from framestyle.cli import app
from framestyle.finish.colour import linear_to_srgb
from framestyle.qc.flash_check import flash_warning, verdict_line
from framestyle.qc.flashes import analyse_flashes, flash_geometry
from framestyle.settings import Settings

from conftest import STYLE

runner = CliRunner()
W, H = 240, 180  # 4:3 fills WCAG's 1024×768 reference screen: a 10° field is 80×60 px here
FPS = 24


def _run(*args):
    result = runner.invoke(app, [str(a) for a in args])
    return result.exit_code, result.stdout, result.stderr


def _grey(linear_luminance: float, size=(W, H)) -> np.ndarray:
    """An sRGB frame (H, W, 3) whose WCAG relative luminance is ``linear_luminance``."""
    return np.full((size[1], size[0], 3), float(linear_to_srgb(linear_luminance)), np.float32)


def _patch(blocks: int, on: bool) -> np.ndarray:
    """Black, with a square of ``blocks`` × ``blocks`` measurement blocks white if ``on``."""
    geometry = flash_geometry(W, H)
    frame = np.zeros((H, W, 3), np.float32)
    if on:
        (bw, bh), (x0, y0) = geometry.block_size, geometry.origin
        frame[y0:y0 + blocks * bh, x0:x0 + blocks * bw] = 1.0
    return frame


def _strobe(a: np.ndarray, b: np.ndarray, half_period: int, frames: int = 2 * FPS) -> list[np.ndarray]:
    """``a`` for ``half_period`` frames, then ``b``, and so on: fps / (2 half_period) flashes/s."""
    return [b if (i // half_period) % 2 else a for i in range(frames)]


def _noise(frames: int = FPS + 2) -> list[np.ndarray]:
    """Black/white 1-pixel noise, new every frame, at 1024×768 (a pixel is 0.03° × 0.04°)."""
    rng = np.random.default_rng(7)
    return [np.repeat(rng.integers(0, 2, (768, 1024, 1)).astype(np.float32), 3, axis=2) for _ in range(frames)]


def _write_folder(folder: Path, frames) -> Path:
    folder.mkdir(parents=True)
    for i, frame in enumerate(frames):
        codes = np.round(np.clip(frame, 0, 1) * 255).astype(np.uint8)
        cv2.imwrite(str(folder / f"case_{i + 1:04d}.png"), codes[..., ::-1],  # RGB -> OpenCV's BGR
                    [cv2.IMWRITE_PNG_COMPRESSION, 1])
    return folder


RED = np.float32([1, 0, 0])
# name -> (frames, expected exit code: 0 passes, 1 fails), each with its source.
CASES = {
    # WCAG 2.1 SC 2.3.1: more than three general flashes in any one second over more than 25 %
    # of a 10° field (and, ITU-R BT.1702, of the screen) fails: 24 fps / 6 = 4 flashes a second.
    "full-frame black/white, 4 flashes/s": (lambda: _strobe(_grey(0), _grey(1), 3), 1),
    # WCAG 2.1: "no more than three general flashes ... within any one-second period" passes.
    "full-frame black/white, 2 flashes/s": (lambda: _strobe(_grey(0), _grey(1), 6), 0),
    # WCAG 2.1 definition: a general flash needs the darker image below 0.80 relative luminance.
    "change of 18 % with the darker state at 0.82, 4/s": (lambda: _strobe(_grey(0.82), _grey(1), 3), 0),
    # WCAG 2.1 definition: a general flash is a change of 10 % or more of the maximum luminance.
    "change of 8 % (0.30 <-> 0.38), 4/s": (lambda: _strobe(_grey(0.30), _grey(0.38), 3), 0),
    # WCAG 2.1: fails only over 25 % of any 10° field. 8×8 of a field's 20×20 blocks is 16 %;
    # 15×15 is 56 % (and under a quarter of the screen, so ITU-R BT.1702 passes it).
    "small flashing patch (16 % of a 10° field), 4/s": (lambda: _strobe(_patch(8, False), _patch(8, True), 3), 0),
    "large flashing patch (56 % of a 10° field), 4/s": (lambda: _strobe(_patch(15, False), _patch(15, True), 3), 1),
    # WCAG 2.1 note: a transition to or from saturated red (R/(R+G+B) >= 0.8) with a change of
    # (R-G-B)*320 > 20 is a red flash. sRGB red has L = 0.2126, grey 127/255 has L = 0.2122:
    # no general flash (a 0.04 % change), but 4 red flashes a second.
    "saturated red against grey of equal luminance, 4/s": (
        lambda: _strobe(np.broadcast_to(RED, (H, W, 3)), _grey(0.2122), 3), 1),
    # WCAG 2.1 exception: white noise (elements under 0.1°) does not violate the thresholds.
    "1-pixel black/white noise changing every frame": (_noise, 0),
}


@pytest.mark.parametrize("name", list(CASES))
def test_flashes_command_exit_code_follows_the_standards_verdict(name, tmp_path):
    make, expected = CASES[name]
    folder = _write_folder(tmp_path / "case", make())
    code, out, err = _run("flashes", folder, "--fps", FPS)
    assert code == expected, out + err
    assert ("verdict (frames): pass" in out) == (expected == 0), out
    assert "an aid, not a certification" in out and "regulators prevail" in out


def test_flashes_command_names_the_kind_standard_and_worst_second(tmp_path):
    red = _write_folder(tmp_path / "red", CASES["saturated red against grey of equal luminance, 4/s"][0]())
    code, out, _ = _run("flashes", red, "--fps", FPS)
    assert code == 1
    # A red flash only: WCAG 2.1 SC 2.3.1 and BT.1702 fail the red flashes, pass the general ones.
    assert "WCAG 2.1 SC 2.3.1 (25 % of any 10° field): general flashes pass, red flashes fail" in out
    assert "ITU-R BT.1702 (25 % of the screen): general flashes pass, red flashes fail" in out
    # Transitions at frames 3, 6, ... 24: the first second with 8 of them (4 flashes) starts
    # at frame 1, 00:00:00:01 at 24 fps; the whole screen flashes.
    assert ("second from 00:00:00:01: red, 4 flashes, 100 % of a 10° field (over WCAG's 25 %), 100 % of the screen "
            "(over BT.1702's 25 %)") in out
    # a patch over a quarter of a 10° field but under a quarter of the screen: each area against its own standard
    patch = _write_folder(tmp_path / "patch", CASES["large flashing patch (56 % of a 10° field), 4/s"][0]())
    code, out, _ = _run("flashes", patch, "--fps", FPS)
    assert code == 1 and "of a 10° field (over WCAG's 25 %)" in out and "of the screen (within BT.1702's 25 %)" in out


def test_a_picture_narrower_than_a_10_degree_field_says_how_its_area_is_counted(tmp_path):
    # 1200×64 fitted to WCAG's 1024×768 reference screen: a 10° field (341×256 there) is
    # 400×300 px of the picture, which fills 64/300 = 21 % of it; a whole-picture strobe is
    # then within WCAG's 25 % and over BT.1702's (the screen is the picture).
    strip = _write_folder(tmp_path / "strip", _strobe(_grey(0, (1200, 64)), _grey(1, (1200, 64)), 3))
    code, out, _ = _run("flashes", strip, "--fps", FPS)
    assert code == 1 and "(a 10° field is 400×300 px)" in out
    assert "the picture fills 21 % of a 10° field at most: WCAG's area counts the screen around it as steady" in out
    assert "WCAG 2.1 SC 2.3.1 (25 % of any 10° field): general flashes pass" in out
    assert "ITU-R BT.1702 (25 % of the screen): general flashes fail" in out
    code, out, _ = _run("flashes", _write_folder(tmp_path / "full", _strobe(_grey(0), _grey(1), 3)), "--fps", FPS)
    assert "the picture fills" not in out


def test_flashes_command_json_parses_and_plot_is_a_png(tmp_path):
    folder = _write_folder(tmp_path / "strobe", CASES["full-frame black/white, 4 flashes/s"][0]())
    plot = tmp_path / "timeline.png"
    code, out, _ = _run("flashes", folder, "--fps", FPS, "--json", "--plot", plot)
    assert code == 1
    check = json.loads(out)
    assert check["passed"] is False and check["judged"] == "frames" and check["plot"] == str(plot)
    report = check["reports"]["frames"]
    assert report["fps"] == FPS and report["frames"] == 2 * FPS
    assert report["verdicts"] == {"wcag21": {"general": "fail", "red": "pass"}, "bt1702": {"general": "fail", "red": "pass"}}
    assert cv2.imread(str(plot)) is not None
    frame = sorted(folder.iterdir())[5]
    kept = frame.read_bytes()
    code, _, err = _run("flashes", folder, "--fps", FPS, "--plot", frame)  # it replaced the footage's frame
    assert code == 2 and err.strip().endswith("the plot would land among the frames of " + str(folder) + "; write it elsewhere")
    assert frame.read_bytes() == kept


def test_flashes_command_reads_a_video_at_its_own_frame_rate(tmp_path):
    # Black and white every 3 frames: at the video's 25 fps, 25/6 = 4.2 flashes a second (WCAG
    # 2.1 SC 2.3.1 fails); told it is 12 fps, the same frames make 2 a second (passes).
    folder = _write_folder(tmp_path / "frames", _strobe(_grey(0, (64, 48)), _grey(1, (64, 48)), 3, 50))
    video = tmp_path / "strobe.mp4"
    subprocess.run([imageio_ffmpeg.get_ffmpeg_exe(), "-v", "error", "-framerate", "25", "-i",
                    str(folder / "case_%04d.png"), "-c:v", "libx264", "-pix_fmt", "yuv420p", str(video)], check=True)
    code, out, _ = _run("flashes", video, "--json")
    assert code == 1 and json.loads(out)["reports"]["frames"]["fps"] == 25
    assert _run("flashes", video, "--fps", 12)[0] == 0


@pytest.mark.parametrize("problem", ["missing", "corrupt frame", "bad fps"])
def test_flashes_command_bad_input_is_one_line_and_exit_2(problem, tmp_path):
    folder = _write_folder(tmp_path / "clip", CASES["full-frame black/white, 2 flashes/s"][0]()[:4])
    options, name = [], str(folder)
    if problem == "missing":
        folder, name = tmp_path / "nowhere", "nowhere"
    elif problem == "corrupt frame":
        (folder / "case_0002.png").write_bytes(b"not a png")
        name = "case_0002.png"
    else:
        options, name = ["--fps", "0"], "--fps"
    code, _, err = _run("flashes", folder, *options)
    lines = err.strip().splitlines()
    assert code == 2 and len(lines) == 1 and "Traceback" not in err, err
    assert name in lines[0]


def test_a_warning_says_whether_the_source_already_flashes():
    # The words a render's warning uses, for a render that flashes (4/s, WCAG 2.1 fails) over a
    # source that flashes or that does not (2/s passes).
    fails = analyse_flashes(_strobe(_grey(0, (64, 48)), _grey(1, (64, 48)), 3), FPS).to_dict()
    passes = analyse_flashes(_strobe(_grey(0, (64, 48)), _grey(1, (64, 48)), 6), FPS).to_dict()
    assert flash_warning({"render": passes, "source": fails}) is None
    added = flash_warning({"render": fails, "source": passes}, "shot 3")
    assert added.startswith("shot 3 fails WCAG 2.1 SC 2.3.1 (general flashes), ITU-R BT.1702 (general flashes)")
    assert "00:00:00:01 (general, 100 % of a 10° field)" in added and "the stylisation adds" in added
    assert "the source already flashes (00:00:00:01)" in flash_warning({"render": fails, "source": fails})
    assert verdict_line(passes) == "pass"


def test_store_records_flash_checks_of_the_render_and_of_each_shot_and_a_restart_discards_them(tmp_path):
    out = store.Store(tmp_path / "out")
    assert out.flash_check("render") is None and out.flash_plot() is None
    out.write_flash_check("render", {"passed": False})
    out.write_flash_check("source", {"passed": True}, shot=3)
    assert out.flash_check("render") == {"passed": False}
    assert out.flash_check("source", shot=3) == {"passed": True}
    assert out.flash_check("source") is None and out.flash_check("render", shot=3) is None
    (out.out / store.FLASH_PLOT).write_bytes(b"png")
    assert out.flash_plot() == out.out / store.FLASH_PLOT
    with out.folder_lock():
        out.restart([])
    assert out.flash_check("render") is None and out.flash_check("source", shot=3) is None
    assert out.flash_plot() is None


def test_a_render_records_its_flash_check_and_the_sources_and_warns_where_it_flashes(tmp_path):
    # 13 frames alternating black and white every frame at 8 fps: 8 transitions (4 flashes) in
    # any second from frame 1 on, over WCAG 2.1's three; shot 1 is frames 1-4, shot 2 frames
    # 5-13 (which flash 4 times in a second on their own). --strength 0 delivers the footage
    # itself, so the render flashes exactly where its source does.
    clip = _write_folder(tmp_path / "clip", _strobe(_grey(0, (128, 72)), _grey(1, (128, 72)), 1, 13))
    shots = tmp_path / "shots.txt"
    shots.write_text("1\n5\n")
    out = tmp_path / "out"
    render = ["stylise", clip, "--style", STYLE, "--out", out, "--width", "128", "--iterations", "1",
              "--strength", "0", "--fps", "8", "--shot-list", shots]
    code, _, err = _run(*render, "--shots", "1", "-q")
    assert code == 0, err
    assert store.Store(out).flash_check("render") is None  # the render is not finished yet
    code, _, err = _run("flashes", out)
    assert code == 2 and "the render is unfinished (4 of 13 frames" in err

    # A farm's worker checks its shot as it finishes (the shot's frames alone).
    manifest = store.read_manifest(out)
    plan = pipeline.plan_render(clip, out, Settings.from_dict(manifest["settings"]), shot_file=shots)
    events = []
    pipeline.render_shot(plan, 2, lambda e, **i: events.append((e, i)), check_flashes=True)
    shot = store.Store(out).flash_check("render", shot=2)
    assert shot["frames"] == 9 and shot["worst_seconds"][0]["timecode"] == "00:00:00:05"  # its 2nd frame
    assert any(e == "warning" and i["message"].startswith("shot 2 fails WCAG 2.1 SC 2.3.1") for e, i in events)

    code, stdout, err = _run(*render)  # finishes the render: the whole check, recorded, printed, warned
    assert code == 0, err
    recorded = {kind: store.Store(out).flash_check(kind) for kind in ("render", "source")}
    assert recorded["render"]["frames"] == recorded["source"]["frames"] == 13
    assert not recorded["render"]["passed"] and not recorded["source"]["passed"]
    assert cv2.imread(str(out / store.FLASH_PLOT)) is not None
    assert f"timeline {out / store.FLASH_PLOT}" in stdout
    assert "render: 13 frames at 8 fps" in stdout and "source: 13 frames at 8 fps" in stdout
    assert "second from 00:00:00:01: general, 4 flashes, 100 % of a 10° field" in stdout  # frames 1-8
    warning = next(line for line in err.splitlines() if "the render fails" in line)
    assert "it flashes in the second(s) from 00:00:00:01" in warning
    assert "the source already flashes (00:00:00:01)" in warning

    code, stdout, _ = _run("flashes", out, "--json")
    assert code == 1
    check = json.loads(stdout)
    assert check["judged"] == "render" and set(check["reports"]) == {"render", "source"}
    assert check["plot"] == str(out / store.FLASH_PLOT)
    assert check["reports"]["render"]["verdicts"] == recorded["render"]["verdicts"]

    def read_only(self):  # an archived render on a read-only file system
        raise OSError(30, "Read-only file system", str(out / ".framestyle" / "locks" / "folder.lock"))

    with pytest.MonkeyPatch.context() as patch:
        patch.setattr(store.Store, "folder_lock", read_only)
        code, stdout, err = _run("flashes", out, "--json")
    assert code == 1 and json.loads(stdout)["plot"] is None
    assert "folder.lock: Read-only file system; the timeline is not drawn there (give --plot PATH" in err

    clip.rename(tmp_path / "moved")  # the footage moved: named as the render's, and --source finds it
    code, _, err = _run("flashes", out)
    assert code == 2 and len(err.strip().splitlines()) == 1 and "give --source" in err
    code, stdout, _ = _run("flashes", out, "--json", "--source", tmp_path / "moved")
    assert code == 1 and json.loads(stdout)["reports"]["render"]["verdicts"] == recorded["render"]["verdicts"]


def test_a_preview_warns_when_its_source_flashes(tmp_path):
    # Black and white alternating at 8 fps: 4 flashes in frames 1-8 (WCAG 2.1 SC 2.3.1 fails).
    clip = _write_folder(tmp_path / "clip", _strobe(_grey(0, (128, 72)), _grey(1, (128, 72)), 1, 9))
    code, _, err = _run("preview", clip, "--style", STYLE, "--out", tmp_path / "out", "--every", "9",
                        "--width", "128", "--iterations", "1", "--fps", "8", "-q")
    assert code == 0, err
    assert "the source fails WCAG 2.1 SC 2.3.1 (general flashes)" in err and "00:00:00:01" in err
