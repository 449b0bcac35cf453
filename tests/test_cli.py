"""The command line as a new user meets it: main job, previews, video, shots, bad input."""

import json
import shutil
import signal
import subprocess
import sys
import time
from pathlib import Path

import cv2
import imageio_ffmpeg
import numpy as np
import pytest
from typer.testing import CliRunner

from framestyle import store
from framestyle.cli import app
from framestyle.style import network

from conftest import SAMPLE, STYLE

runner = CliRunner()
FAST = ["--width", "128", "--iterations", "4"]


def _run(*args):
    result = runner.invoke(app, [str(a) for a in args])
    return result.exit_code, result.stdout, result.stderr


def _one_line_error(code, stderr, name):
    assert code == 2
    lines = stderr.strip().splitlines()
    assert len(lines) == 1, stderr
    assert "Traceback" not in stderr and name in lines[0]


@pytest.mark.parametrize("command", ["stylise", "preview", "resume", "shots", "report", "stability", "flashes"])
def test_help_text_wraps_as_paragraphs(command):
    # the docstrings' own line breaks came through into the help, leaving lines like "0-based"
    # under a full one; a paragraph is re-wrapped to the terminal's width
    result = CliRunner().invoke(app, [command, "--help"], terminal_width=100, env={"COLUMNS": "100"})
    assert result.exit_code == 0
    prose = result.stdout.split("\u256d")[0].splitlines()  # what comes before the first panel
    for line, after in zip(prose, prose[1:]):
        if line.strip() and after.strip():  # a line followed by more of its paragraph is full
            assert len(line.rstrip()) > 60, f"{line!r} then {after!r}"
    assert "{" + ("OUT" if command in ("resume", "report", "stability") else "PATH" if command == "flashes"
                  else "INPUT") + "}" in result.stdout  # the argument as the description names it


def test_the_farm_bar_says_what_the_workers_do_and_nothing_once_all_is_done():
    # it said "all frames (idle)" under a full bar at the end of every farm render
    from framestyle.cli import _Bars

    bars = _Bars(quiet=False)
    bars("start", frames=10, done=0, shots=2, sizes=[((128, 72), None, [1, 2])])
    try:
        described = lambda: bars.progress.tasks[0].description
        bars("farm", done=3, shots=[1, 2])
        assert described() == "all frames (shot 1, shot 2)"
        bars("farm", done=5, shots=[])
        assert described() == "all frames (waiting for a worker)"
        bars("farm", done=10, shots=[])
        assert described() == "all frames"
    finally:
        bars.stop()


def test_stylise_writes_frames_and_says_where(small_clip, tmp_path):
    code, out, _ = _run("stylise", small_clip, "--style", STYLE, "--out", tmp_path / "o", "-q", *FAST, "--shots", "2")
    assert code == 0
    assert f"10 stylised frames in {tmp_path / 'o'}" in out


def test_resume_renders_the_remaining_shots_from_the_manifest_alone(small_clip, tmp_path):
    out = tmp_path / "o"
    assert _run("stylise", small_clip, "--style", STYLE, "--out", out, "-q", *FAST, "--shots", "1")[0] == 0
    code, stdout, err = _run("resume", out, "--shots", "2")
    assert code == 0, err
    assert len(list(out.glob("take_*.png"))) == 20
    assert "shot" in stdout and "all" in stdout  # the summary table
    assert len(store.Store(out).finished()) == 20
    code, _, err = _run("resume", small_clip / "take_001.png")  # the footage given by mistake
    _one_line_error(code, err, "take_001.png: a file, not a render's output folder")


def test_a_render_follows_its_footage_when_it_moves(small_clip, tmp_path):
    clip, out = tmp_path / "clip", tmp_path / "o"
    shutil.copytree(small_clip, clip)
    assert _run("stylise", clip, "--style", STYLE, "--out", out, "-q", *FAST, "--shots", "1")[0] == 0
    clip.rename(tmp_path / "moved")
    code, _, err = _run("resume", out, "--shots", "2")
    _one_line_error(code, err, f"{clip}: source footage (give --source if it moved) not found")
    code, _, err = _run("resume", out, "--source", tmp_path / "moved", "-q")
    assert code == 0, err
    assert store.read_manifest(out)["inputs"]["input"] == str(tmp_path / "moved")
    assert len(store.Store(out).finished()) == 20
    assert _run("report", out)[0] == 0 and _run("resume", out, "-q")[0] == 0  # no --source needed any more
    (tmp_path / "moved").rename(clip)  # stylise with the footage at a new place updates the manifest too
    assert _run("stylise", clip, "--style", STYLE, "--out", out, "-q", *FAST)[0] == 0
    assert store.read_manifest(out)["inputs"]["input"] == str(clip)


def test_resume_follows_style_images_that_moved(small_clip, tmp_path):
    # a sweep: resume had no way to a moved style image ("no such image file"); stylise had
    style = tmp_path / "paint.png"
    shutil.copy(STYLE, style)
    out = tmp_path / "o"
    assert _run("stylise", small_clip, "--style", style, "--out", out, "-q", *FAST, "--shots", "1")[0] == 0
    style.rename(tmp_path / "kept.png")
    code, _, err = _run("resume", out, "-q")
    _one_line_error(code, err, f"{style}: style image not found (give --style with its new place if it moved)")
    code, _, err = _run("resume", out, "-q", "--style", SAMPLE / "style_ink.png")  # another painting
    _one_line_error(code, err, f"{out}: was rendered with different settings (styles); `framestyle stylise` with "
                               f"a new --out or --restart starts over")
    assert len(store.Store(out).finished()) == 10
    code, _, err = _run("resume", out, "-q", "--style", tmp_path / "kept.png")
    assert code == 0, err
    assert len(store.Store(out).finished()) == 20
    assert list(store.read_manifest(out)["inputs"]["styles"]) == [str(tmp_path / "kept.png")]
    assert _run("resume", out, "-q")[0] == 0  # the manifest names the new place


def test_ctrl_c_says_the_render_is_kept_and_how_to_continue(small_clip, tmp_path):
    out = tmp_path / "o"
    child = subprocess.Popen([sys.executable, "-m", "framestyle", "stylise", str(small_clip), "--style", str(STYLE),
                              "--out", str(out), "--width", "128", "-q"],
                             stderr=subprocess.PIPE, text=True, cwd=Path(__file__).parents[1],
                             # Ctrl-C as in a shell: an earlier test's library may leave SIGINT ignored
                             # in this process, and an ignored SIGINT is inherited
                             preexec_fn=lambda: signal.signal(signal.SIGINT, signal.SIG_DFL))
    deadline = time.monotonic() + 240
    while not list(out.glob("take_*.png")) and time.monotonic() < deadline and child.poll() is None:
        time.sleep(0.2)
    child.send_signal(signal.SIGINT)
    err = child.communicate(timeout=120)[1]
    assert child.returncode == 130
    assert err.strip().splitlines()[-1] == f"framestyle: interrupted; finished frames are kept: `framestyle resume {out}` continues"


def test_a_render_goes_on_when_the_reader_of_its_display_goes(small_clip, tmp_path):
    # a sweep: `framestyle resume OUT | head -1` ended the render at its next line, exit code 1
    # and no word (rich's console exits on a broken pipe); the display now falls silent instead
    out = tmp_path / "o"
    child = subprocess.Popen([sys.executable, "-m", "framestyle", "stylise", str(small_clip), "--style", str(STYLE),
                              "--out", str(out), *FAST], stdout=subprocess.PIPE, stderr=subprocess.PIPE,
                             text=True, cwd=Path(__file__).parents[1])
    assert child.stdout.readline().startswith("20 frames in 2 shot(s)")  # what `head -1` reads
    child.stdout.close()  # ... before the first shot's line
    err = child.stderr.read()
    assert child.wait(timeout=240) == 0, err
    assert "Traceback" not in err and "Broken pipe" not in err
    assert len(store.Store(out).finished()) == 20


def test_preview_writes_every_nth_frame_and_a_contact_sheet_per_shot(small_clip, tmp_path):
    code, out, _ = _run("preview", small_clip, "--style", STYLE, "--out", tmp_path, "--every", "4", "-q", *FAST)
    assert code == 0
    previews = sorted(p.name for p in (tmp_path / "preview").glob("take_*.png"))
    # each shot sampled from its own first frame: shot 1 = frames 0, 4, 8; shot 2 = 10, 14, 18
    assert previews == ["take_001.png", "take_005.png", "take_009.png", "take_011.png", "take_015.png", "take_019.png"]
    for n in (1, 2):
        sheet = cv2.imread(str(tmp_path / "preview" / f"contact_shot{n:03d}.png"))
        assert sheet is not None and sheet.shape[1] > 3 * 240
    assert not list(tmp_path.glob("take_*.png"))  # a preview is not a render
    # previewed again, shot 2 every 5 frames: its earlier frames go, shot 1's stay
    assert _run("preview", small_clip, "--style", STYLE, "--out", tmp_path, "--every", "5", "--shots", "2", "-q",
                *FAST)[0] == 0
    previews = sorted(p.name for p in (tmp_path / "preview").glob("take_*.png"))
    assert previews == ["take_001.png", "take_005.png", "take_009.png", "take_011.png", "take_016.png"]


def test_a_preview_of_footage_narrower_than_its_default_width_says_nothing_of_a_width(small_clip, tmp_path):
    # a sweep: no --width given, and the preview warned "width 240: the source is 128 pixels wide"
    code, out, err = _run("preview", small_clip, "--style", STYLE, "--out", tmp_path, "--every", "9",
                          "--iterations", "2")
    assert code == 0, err
    assert "framestyle: warning" not in out + err
    assert cv2.imread(str(tmp_path / "preview" / "take_001.png")).shape[:2] == (72, 128)


def test_a_new_preview_leaves_no_contact_sheet_of_an_earlier_one_behind(small_clip, tmp_path):
    def sheets():
        return sorted(p.name for p in (tmp_path / "o" / "preview").glob("contact_*.png"))

    (tmp_path / "three.txt").write_text("1\n6\n11\n")
    preview = ("preview", small_clip, "--style", STYLE, "--out", tmp_path / "o", "--every", "10", "-q", *FAST)
    code, _, err = _run(*preview, "--shot-list", tmp_path / "three.txt")
    assert code == 0, err
    assert sheets() == ["contact_shot001.png", "contact_shot002.png", "contact_shot003.png"]
    assert _run(*preview, "--shots", "1")[0] == 0  # detected: two shots; shot 2's sheet stays, shot 3's goes
    assert sheets() == ["contact_shot001.png", "contact_shot002.png"]
    assert _run(*preview, "--shot-list", tmp_path / "three.txt")[0] == 0
    assert _run(*preview)[0] == 0  # every shot previewed: only its sheets
    assert sheets() == ["contact_shot001.png", "contact_shot002.png"]


def test_a_preview_goes_beside_a_render_of_its_footage_never_of_other_footage(small_clip, tmp_path):
    out = tmp_path / "o"
    assert _run("stylise", small_clip, "--style", STYLE, "--out", out, "-q", *FAST, "--shots", "2")[0] == 0
    frames = {p.name: p.read_bytes() for p in out.glob("take_*.png")}
    other = tmp_path / "other"
    shutil.copytree(small_clip, other)
    first = sorted(other.glob("take_*.png"))[0]
    cv2.imwrite(str(first), 255 - cv2.imread(str(first)))  # the same names, other pictures
    code, _, err = _run("preview", other, "--style", STYLE, "--out", out, "--every", "4", "-q", *FAST)
    _one_line_error(code, err, f"{other}: not the footage the render in {out} was made from")
    assert not (out / "preview").exists()
    # the same footage given by hand to the commands that read a render and its source
    code, _, err = _run("stability", out, "--source", other, "--detail-frames", "0")
    _one_line_error(code, err, f"{other}: not the footage the render in {out} was made from")
    _one_line_error(*_run("report", out, "--source", other)[::2], "not the footage")
    _one_line_error(*_run("flashes", out, "--source", other)[::2], "not the footage")
    # and to resume (a sweep: it said the input frames had changed since the render started)
    _one_line_error(*_run("resume", out, "--source", other)[::2], f"{other}: not the footage the render in {out}")
    assert _run("preview", small_clip, "--style", STYLE, "--out", out, "--every", "4", "-q", *FAST)[0] == 0
    assert len(list((out / "preview").glob("take_*.png"))) == 6
    assert {p.name: p.read_bytes() for p in out.glob("take_*.png")} == frames  # the render untouched


def test_levels_that_do_not_fit_the_working_size_are_said(small_clip, tmp_path):
    # 128×72: a half-size level (64×36) is under the network's 64 pixels a side, so one level runs
    code, out, err = _run("stylise", small_clip, "--style", STYLE, "--out", tmp_path / "o", *FAST, "--shots", "2",
                          "--levels", "3", "--warm-levels", "2")
    assert code == 0, err
    said = out + err
    assert "levels 3: the working size 128×72 has room for 1" in said and "warm_levels 2: the working" in said
    code, out, err = _run("stylise", small_clip, "--style", STYLE, "--out", tmp_path / "p", *FAST, "--shots", "2")
    assert code == 0 and "has room for" not in out + err  # the default levels always fit


def test_settings_that_cannot_act_as_asked_are_said(small_clip, tmp_path):
    mattes = tmp_path / "mattes"
    mattes.mkdir()
    for k, frame in enumerate(sorted(small_clip.glob("take_*.png"))):
        shutil.copy(frame, mattes / f"matte_{k:04d}.png")  # numbered from 0, the plate from 1
    code, out, err = _run("stylise", small_clip, "--style", STYLE, "--out", tmp_path / "o", "--iterations", "2",
                          "--shots", "2", "--width", "4000", "--no-temporal", "--passes", "3", "--flow-preset", "fast",
                          "--matte", mattes)
    assert code == 0, err
    said = out + err
    assert "width 4000: the source is 128 pixels wide" in said, said
    assert "flow_preset, passes: no effect with temporal off" in said
    assert "paired with the input's in order (matte_0000.png with take_001.png)" in said
    code, out, err = _run("preview", small_clip, "--style", STYLE, "--style", STYLE, "--style-mix", "1,0", "--out",
                          tmp_path / "p", *FAST, "--every", "9", "--temporal-weight", "5", "--matte-softness", "4")
    assert code == 0, err
    said = out + err
    assert "temporal_weight: no effect in a preview" in said and "matte_softness: no effect without a matte" in said
    assert "style_mix: style.png weighted 0, so no part of the look" in said
    tiny = tmp_path / "tiny.png"
    bgra = cv2.cvtColor(cv2.resize(cv2.imread(str(STYLE)), (8, 8), interpolation=cv2.INTER_AREA), cv2.COLOR_BGR2BGRA)
    bgra[:4, :4, 3] = 0  # a quarter transparent, its colour hidden
    bgra[4:, :4, 3] = 200  # another quarter translucent (a sweep's 78 % opaque image was called all transparent)
    cv2.imwrite(str(tiny), bgra)
    code, out, err = _run("preview", small_clip, "--style", tiny, "--out", tmp_path / "t", *FAST, "--every", "9")
    assert code == 0, err
    assert (f"{tiny}: a 8×8 style image is enlarged 16× beside the 128×72 working frame, so its strokes come out "
            f"blurred; one of 32 pixels or more on its longer side keeps them") in out + err
    assert f"{tiny}: 50% of the style image is not fully opaque, and its colour there counts" in out + err
    code, out, err = _run("stylise", small_clip, "--style", STYLE, "--out", tmp_path / "q", *FAST, "--shots", "2")
    assert code == 0 and "framestyle: warning" not in out + err  # the defaults: nothing to say


def test_a_frame_rate_for_a_video_is_refused_as_its_sound_follows_its_own(tmp_path):
    video = tmp_path / "clip.mp4"
    subprocess.run([imageio_ffmpeg.get_ffmpeg_exe(), "-v", "error", "-f", "lavfi", "-i", "testsrc2=size=128x72:rate=25",
                    "-t", "0.2", "-pix_fmt", "yuv420p", "-c:v", "libx264", str(video)], check=True)
    code, _, err = _run("stylise", video, "--style", STYLE, "--out", tmp_path / "o", *FAST, "--fps", "30")
    _one_line_error(code, err, "clip.mp4: a video keeps its own frame rate (25 frames/s")
    assert not (tmp_path / "o").exists()
    assert _run("stylise", video, "--style", STYLE, "--out", tmp_path / "o", *FAST, "--fps", "25", "-q")[0] == 0


def test_rgba_footage_is_delivered_with_its_own_alpha(small_clip, tmp_path):
    # a title over transparency: each frame's alpha a ramp, moving from frame to frame
    plate = tmp_path / "title"
    plate.mkdir()
    for k, frame in enumerate(sorted(small_clip.glob("take_*.png"))[:6]):
        bgr = cv2.imread(str(frame))
        ramp = np.tile(np.linspace(0, 255, bgr.shape[1]).astype(np.uint8), (bgr.shape[0], 1))
        cv2.imwrite(str(plate / f"title_{k + 1:04d}.png"), np.dstack([bgr, np.roll(ramp, 7 * k, axis=1)]))
    code, _, err = _run("stylise", plate, "--style", STYLE, "--out", tmp_path / "o", "-q", *FAST)
    assert code == 0, err
    for k in range(1, 7):
        source = cv2.imread(str(plate / f"title_{k:04d}.png"), cv2.IMREAD_UNCHANGED)  # OpenCV's decode: the reference
        delivered = cv2.imread(str(tmp_path / "o" / f"title_{k:04d}.png"), cv2.IMREAD_UNCHANGED)
        assert delivered.shape == source.shape == (72, 128, 4)
        assert np.array_equal(delivered[..., 3], source[..., 3])  # the alpha as it came
        assert np.abs(delivered[..., :3].astype(int) - source[..., :3]).mean() > 5  # the colour stylised


def test_video_input_gives_png_frames_and_an_mp4_with_the_source_audio(tmp_path):
    video = tmp_path / "clip.mp4"
    ffmpeg = imageio_ffmpeg.get_ffmpeg_exe()
    subprocess.run([ffmpeg, "-v", "error", "-f", "lavfi", "-i", "testsrc2=size=128x72:rate=12", "-f", "lavfi",
                    "-i", "sine=frequency=440", "-t", "0.5", "-pix_fmt", "yuv420p", "-c:v", "libx264",
                    "-c:a", "aac", str(video)], check=True)
    code, out, err = _run("stylise", video, "--style", STYLE, "--out", tmp_path / "o", "-q", *FAST)
    assert code == 0, err
    pngs = sorted((tmp_path / "o").glob("frame_*.png"))
    assert len(pngs) == 6
    result = tmp_path / "o" / "clip_framestyle.mp4"
    assert f"preview video with the source's audio and timecode: {result}" in out
    probe = subprocess.run([ffmpeg, "-i", str(result)], capture_output=True, text=True).stderr
    assert "Audio:" in probe and "Video:" in probe
    assert imageio_ffmpeg.count_frames_and_secs(str(result))[0] == 6


def test_the_video_of_a_render_follows_its_renamed_footage(tmp_path):
    # a sweep: a clip renamed between runs left the old clip_framestyle.mp4 beside a new one
    video = tmp_path / "clip.mp4"
    subprocess.run([imageio_ffmpeg.get_ffmpeg_exe(), "-v", "error", "-f", "lavfi", "-i", "testsrc2=size=128x72:rate=12",
                    "-t", "0.5", "-pix_fmt", "yuv420p", "-c:v", "libx264", str(video)], check=True)
    out = tmp_path / "o"
    assert _run("stylise", video, "--style", STYLE, "--out", out, "-q", *FAST, "--prores")[0] == 0
    made = {name: (out / name).read_bytes() for name in ("clip_framestyle.mp4", "clip_framestyle.mov")}
    video.rename(tmp_path / "take2.mp4")
    code, _, err = _run("stylise", tmp_path / "take2.mp4", "--style", STYLE, "--out", out, "-q", *FAST, "--prores")
    assert code == 0, err
    assert store.Store(out).videos() == ["take2_framestyle.mov", "take2_framestyle.mp4"]
    for name, data in made.items():  # renamed, not encoded again
        assert (out / name.replace("clip", "take2")).read_bytes() == data
    assert "renamed clip_framestyle.mp4 to take2_framestyle.mp4" in (out / "render.log").read_text()


def test_shots_command_finds_the_sample_clip_cut():
    code, out, _ = _run("shots", SAMPLE / "frames", "--json")
    assert code == 0
    # The sample's files are numbered from 1: drift_0001.png ... drift_0048.png.
    assert [(s["shot"], s["start"], s["end"]) for s in json.loads(out)] == [(1, 1, 28), (2, 29, 48)]
    code, out, _ = _run("shots", SAMPLE / "frames")
    assert "00:00:01:04" in out  # its 29th frame at the 24 fps default (SMPTE ST 12-1 non-drop)


def test_shots_command_edits_cuts_into_a_list_stylise_accepts(small_clip, tmp_path):
    # small_clip's files are take_001 ... take_020: cuts are given by those numbers.
    code, out, _ = _run("shots", small_clip, "--json", "--add-cut", "6", "--remove-cut", "11")
    assert code == 0
    assert [(s["shot"], s["start"], s["end"]) for s in json.loads(out)] == [(1, 1, 5), (2, 6, 20)]
    (tmp_path / "shots.json").write_text(out)
    code, _, err = _run("stylise", small_clip, "--style", STYLE, "--out", tmp_path / "o", "-q", *FAST,
                        "--shot-list", tmp_path / "shots.json", "--shots", "1")
    assert code == 0, err
    assert len(list((tmp_path / "o").glob("take_*.png"))) == 5


@pytest.fixture(scope="module")
def plate(tmp_path_factory):
    """The sample clip as a plate numbered from 1001 (plate_1001.png ... plate_1048.png)."""
    folder = tmp_path_factory.mktemp("plate") / "harbour_plate"
    folder.mkdir()
    for k in range(48):
        (folder / f"plate_{1001 + k}.png").write_bytes((SAMPLE / "frames" / f"drift_{k + 1:04d}.png").read_bytes())
    return folder


def test_shots_command_speaks_source_frame_numbers_and_source_timecode(plate, tmp_path):
    code, out, err = _run("shots", plate, "--start-timecode", "01:00:00:00", "--add-cut", "1040")
    assert code == 0, err
    # 24 fps non-drop from 01:00:00:00 (SMPTE ST 12-1): the 29th frame is 01:00:01:04.
    assert [line.split() for line in out.splitlines()] == [
        ["shot", "first", "last", "frames", "start", "end"],
        ["1", "1001", "1028", "28", "01:00:00:00", "01:00:01:03"],
        ["2", "1029", "1039", "11", "01:00:01:04", "01:00:01:14"],
        ["3", "1040", "1048", "9", "01:00:01:15", "01:00:01:23"],
    ]


def test_shots_command_hands_the_cut_to_editing_software_and_reads_it_back(plate, tmp_path):
    edl, cut = tmp_path / "harbour.edl", tmp_path / "harbour.otio"
    code, out, err = _run("shots", plate, "--fps", "25", "--start-timecode", "10:00:00:00", "--edl", edl,
                          "--otio", cut, "--json")
    assert code == 0, err
    assert f"wrote {edl}" in err and f"wrote {cut}" in err
    shots = json.loads(out)
    assert shots[1] == {"shot": 2, "start": 1029, "end": 1048, "frames": 20,
                        "start_timecode": "10:00:01:03", "end_timecode": "10:00:01:22"}
    assert "002  harbourp V     C        10:00:01:03 10:00:01:23 10:00:01:03 10:00:01:23" in edl.read_text()
    for cut_list in (edl, cut):
        code, again, err = _run("shots", plate, "--fps", "25", "--start-timecode", "10:00:00:00",
                                "--shot-list", cut_list, "--json")
        assert code == 0, err
        assert json.loads(again) == shots


def test_a_cut_list_asked_for_under_a_file_names_the_file(plate, tmp_path):
    # a sweep: mkdir's "File exists" said nothing of which folder was a file
    blocking = tmp_path / "deliveries"
    blocking.write_text("a file where a folder was meant")
    code, _, err = _run("shots", plate, "--edl", blocking / "harbour.edl")
    _one_line_error(code, err, f"cannot write ({blocking} is a file, not a folder)")


def test_shots_command_reads_an_editors_edl(plate, tmp_path):
    edl = tmp_path / "from_editorial.edl"
    edl.write_text("TITLE: harbour v3\nFCM: NON-DROP FRAME\n\n"
                   "001  A001C003 V     C        14:22:05:10 14:22:05:22 01:00:00:00 01:00:00:12\n"
                   "002  A001C007 V     C        14:31:40:00 14:31:41:12 01:00:00:12 01:00:02:00\n", encoding="utf-8")
    # The plate has no timecode of its own: it takes the cut's record start, 01:00:00:00.
    code, out, err = _run("shots", plate, "--shot-list", edl)
    assert code == 0, err
    rows = [line.split() for line in out.splitlines()[1:]]
    assert rows == [["1", "1001", "1012", "12", "01:00:00:00", "01:00:00:11"],
                    ["2", "1013", "1048", "36", "01:00:00:12", "01:00:01:23"]]


@pytest.mark.parametrize(
    "options, words",
    [(["--add-cut", "1049"], "frame 1049 is outside the clip (frames 1001..1048)"),
     (["--remove-cut", "1001"], "cannot remove the cut at frame 1001"),
     (["--start-timecode", "01:00:00:24"], "'01:00:00:24' is not a timecode at 24"),
     (["--start-timecode", "01:00:00;00"], "drop-frame"),
     (["--edl", "cut.xml"], "cut.xml: a cut list is written as .edl")],
)
def test_shots_command_bad_options_are_one_line_errors(plate, options, words):
    code, _, err = _run("shots", plate, *options)
    _one_line_error(code, err, words)


def test_shots_command_cut_list_longer_than_the_clip_is_one_line_error(plate, tmp_path):
    edl = tmp_path / "long.edl"
    edl.write_text("TITLE: long\n001  A001C003 V     C        14:22:05:00 14:22:07:01 01:00:00:00 01:00:02:01\n",
                   encoding="utf-8")
    code, _, err = _run("shots", plate, "--shot-list", edl)
    _one_line_error(code, err, "long.edl: the cut (49 frames, to 01:00:02:00) is longer than the clip")


def test_stability_command_reports_render_and_source(small_clip, tmp_path):
    _run("stylise", small_clip, "--style", STYLE, "--out", tmp_path, "-q", *FAST)
    code, out, _ = _run("stability", tmp_path, "--source", small_clip, "--json", "--detail-frames", "0")
    assert code == 0
    report = json.loads(out)
    assert [s["shot"] for s in report["shots"]] == [1, 2]
    assert report["overall"]["render"] > 0 and report["overall"]["source"] > 0
    assert all(s["detail"] == [] for s in report["shots"])
    code, out, _ = _run("stability", tmp_path, "--source", small_clip, "--detail-frames", "2")
    assert "all" in out and "warping error" in out
    # frames 5 and 10 of shot 1, 15 and 20 of shot 2 (the folder's numbers), each with its ratio
    assert [line.split()[4::2] for line in out.splitlines()[1:3]] == [["5:", "10:"], ["15:", "20:"]]
    assert "stroke detail" in out
    # without --source: the render's own footage, as report and flashes find it (a sweep found
    # stability alone asking for it again)
    code, again, err = _run("stability", tmp_path, "--json", "--detail-frames", "0")
    assert code == 0, err
    assert json.loads(again)["overall"] == report["overall"]
    _one_line_error(*_run("stability", small_clip)[::2], "no framestyle.json; give --source with the footage")


def test_a_one_frame_shot_has_no_warping_error_and_says_so_in_valid_json(small_clip, tmp_path):
    shots = tmp_path / "shots.txt"
    shots.write_text("1\n10\n11\n")  # shot 2 is frame 10 alone: no frame pair to measure
    code, out, err = _run("stylise", small_clip, "--style", STYLE, "--out", tmp_path / "o", *FAST, "--shot-list", shots)
    assert code == 0, err
    assert "shot 2: frames 10-10 (1), 0 s, 4 iterations/frame, warping error -" in out + err
    code, out, _ = _run("stability", tmp_path / "o", "--source", small_clip, "--json", "--detail-frames", "0")
    assert code == 0 and "NaN" not in out  # JSON has no NaN (RFC 8259, Sec. 6, from memory): parsers elsewhere reject it
    report = json.loads(out)
    assert report["shots"][1]["render"] is None and report["shots"][0]["render"] > 0


def test_a_frame_by_frame_render_keeps_exactly_the_detail_of_frames_rendered_on_their_own(small_clip, tmp_path):
    # With the temporal terms off every frame is rendered on its own: the reference the
    # detail measure renders again must be the very same frame, ratio 1.
    _run("stylise", small_clip, "--style", STYLE, "--out", tmp_path, "-q", *FAST, "--no-temporal", "--shots", "2")
    # half a render: its whole shots are measured, the others said to be still to come (a sweep:
    # stability refused a render still going, so a wrangler could not check the shots done)
    code, out, err = _run("stability", tmp_path, "--source", small_clip, "--json", "--detail-frames", "2")
    assert code == 0, err
    shots = json.loads(out)["shots"]
    assert [s["rendered"] for s in shots] == [False, True] and shots[0]["render"] is None and shots[0]["detail"] == []
    assert shots[1]["render"] > 0 and [d["ratio"] for d in shots[1]["detail"]] == [1.0, 1.0]
    assert json.loads(out)["overall"]["render"] == shots[1]["render"]
    code, out, _ = _run("stability", tmp_path, "--detail-frames", "0")
    assert code == 0 and "   1         1-10  not rendered yet" in out
    assert f"(the render is still going: `framestyle resume {tmp_path}` goes on with it" in out
    begun = tmp_path.parent / f"{tmp_path.name}_begun"  # no shot whole yet: nothing to measure, said so
    shutil.copytree(tmp_path, begun)
    (begun / "take_020.png").unlink()
    _one_line_error(*_run("stability", begun, "--detail-frames", "0")[::2],
                    f"{begun}: no shot is rendered whole yet; `framestyle resume {begun}` goes on with it")
    _run("stylise", small_clip, "--style", STYLE, "--out", tmp_path, "-q", *FAST, "--no-temporal")
    code, out, _ = _run("stability", tmp_path, "--source", small_clip, "--json", "--detail-frames", "2")
    assert code == 0
    ratios = [d["ratio"] for s in json.loads(out)["shots"] for d in s["detail"]]
    assert ratios == [1.0, 1.0, 1.0, 1.0]


# --- bad input: one line naming the file and the problem, exit 2, nothing finished touched ---

def test_missing_input_and_missing_style(tmp_path):
    _one_line_error(*_run("stylise", tmp_path / "nope", "--style", STYLE, "--out", tmp_path / "o")[::2], "nope")
    _one_line_error(*_run("stylise", SAMPLE / "frames", "--style", tmp_path / "gone.png", "--out", tmp_path / "o")[::2], "gone.png")


def test_unreadable_style_image(small_clip, tmp_path):
    bad = tmp_path / "style.png"
    bad.write_bytes(b"\x89PNG not really")
    _one_line_error(*_run("stylise", small_clip, "--style", bad, "--out", tmp_path / "o", *FAST)[::2], "style.png")


def test_a_flash_check_at_an_impossible_frame_rate_is_one_line(small_clip):
    # a sweep: its windows are sized by the rate, and 1e308 fps crashed with a traceback
    _one_line_error(*_run("flashes", small_clip, "--fps", "1e308")[::2],
                    "--fps 1e+308: must be a frame rate above 0 and at most 1000")


def test_a_style_image_this_user_may_not_read_is_one_line(small_clip, tmp_path, monkeypatch):
    # a sweep as an unprivileged user (chmod 000): click's own readability check answered with a
    # box of several lines; as root, which may read anything, os.access is made to say no
    import os

    denied = tmp_path / "locked.png"
    denied.write_bytes(STYLE.read_bytes())
    real = os.access
    monkeypatch.setattr(os, "access", lambda path, mode, **kw: Path(path) != denied and real(path, mode, **kw))
    code, _, err = _run("stylise", small_clip, "--style", denied, "--out", tmp_path / "o", *FAST)
    _one_line_error(code, err, "locked.png: file not readable (permission denied)")
    assert not (tmp_path / "o").exists()


def test_folder_without_frames(tmp_path):
    empty = tmp_path / "empty"
    empty.mkdir()
    _one_line_error(*_run("stylise", empty, "--style", STYLE, "--out", tmp_path / "o")[::2], "empty")


def test_frames_of_different_sizes(tmp_path):
    folder = tmp_path / "mixed"
    folder.mkdir()
    cv2.imwrite(str(folder / "f_001.png"), np.zeros((72, 128, 3), np.uint8))
    cv2.imwrite(str(folder / "f_002.png"), np.zeros((80, 128, 3), np.uint8))
    _one_line_error(*_run("stylise", folder, "--style", STYLE, "--out", tmp_path / "o")[::2], "f_002.png")


@pytest.mark.parametrize("content", [b"", b"\x00garbage" * 50], ids=["zero-byte", "corrupt"])
def test_zero_byte_or_corrupt_frame(tmp_path, content):
    folder = tmp_path / "broken"
    folder.mkdir()
    cv2.imwrite(str(folder / "f_001.png"), np.zeros((72, 128, 3), np.uint8))
    (folder / "f_002.png").write_bytes(content)
    _one_line_error(*_run("stylise", folder, "--style", STYLE, "--out", tmp_path / "o")[::2], "f_002.png")


def test_a_jpeg_frame_cut_short_is_refused_not_rendered_grey(tmp_path):
    # libjpeg decodes a cut-off JPEG without failing, filling what is missing with grey
    folder = tmp_path / "jpegs"
    folder.mkdir()
    rng = np.random.default_rng(0)
    for k in (1, 2):
        cv2.imwrite(str(folder / f"f_{k:03d}.jpg"), rng.integers(0, 256, (72, 128, 3), np.uint8))
    data = (folder / "f_002.jpg").read_bytes()
    (folder / "f_002.jpg").write_bytes(data[: len(data) // 2])
    _one_line_error(*_run("stylise", folder, "--style", STYLE, "--out", tmp_path / "o")[::2], "f_002.jpg")


def test_footage_smaller_than_the_network_takes_is_named_as_such(tmp_path):
    folder = tmp_path / "tiny"
    folder.mkdir()
    cv2.imwrite(str(folder / "f_001.png"), np.zeros((60, 80, 3), np.uint8))
    code, _, err = _run("stylise", folder, "--style", STYLE, "--out", tmp_path / "o", "--width", "96")
    _one_line_error(code, err, "tiny")
    assert "frames are 80×60" in err and "--width" not in err


def test_unknown_network_and_too_small_width(small_clip, tmp_path):
    _one_line_error(*_run("stylise", small_clip, "--style", STYLE, "--out", tmp_path / "o", "--network", "alexnet")[::2], "alexnet")
    _one_line_error(*_run("stylise", small_clip, "--style", STYLE, "--out", tmp_path / "o", "--width", "40")[::2], "width 40")


def test_unknown_flow_preset_and_palette(small_clip, tmp_path):
    _one_line_error(*_run("stylise", small_clip, "--style", STYLE, "--out", tmp_path / "o", "--flow-preset", "turbo")[::2], "turbo")
    _one_line_error(*_run("stylise", small_clip, "--style", STYLE, "--out", tmp_path / "o", "--colour", "sepia")[::2], "sepia")
    assert not (tmp_path / "o").exists()


def test_output_path_that_is_a_file(small_clip, tmp_path):
    target = tmp_path / "taken.png"
    target.write_bytes(b"precious")
    _one_line_error(*_run("stylise", small_clip, "--style", STYLE, "--out", target)[::2], "taken.png")
    assert target.read_bytes() == b"precious"


def test_the_input_folder_as_output_is_refused_and_the_footage_kept(small_clip, tmp_path):
    clip = tmp_path / "clip"
    clip.mkdir()
    for path in sorted(small_clip.glob("*.png"))[:2]:
        (clip / path.name).write_bytes(path.read_bytes())
    footage = {p.name: p.read_bytes() for p in clip.iterdir()}
    for extra in ([], ["--restart"]):
        code, _, err = _run("stylise", clip, "--style", STYLE, "--out", clip, "-q", *FAST, *extra)
        _one_line_error(code, err, "input folder")
        assert {p.name: p.read_bytes() for p in clip.iterdir()} == footage


def test_a_folder_of_other_files_is_not_taken_for_a_render(small_clip, tmp_path):
    # A folder without framestyle.json that holds someone's files: neither written into nor,
    # with --restart, emptied. A hidden file (.DS_Store) alone does not count.
    mine = tmp_path / "mine"
    (mine / "preview").mkdir(parents=True)
    (mine / "take_001.png").write_bytes(b"my own frame")
    (mine / "preview" / "notes.txt").write_bytes(b"my notes")
    for extra in ([], ["--restart"]):
        code, _, err = _run("stylise", small_clip, "--style", STYLE, "--out", mine, "-q", *FAST, *extra)
        _one_line_error(code, err, "no framestyle render")
    assert (mine / "take_001.png").read_bytes() == b"my own frame"
    assert (mine / "preview" / "notes.txt").read_bytes() == b"my notes"
    assert not (mine / ".framestyle").exists()
    empty = tmp_path / "empty"
    empty.mkdir()
    (empty / ".DS_Store").write_bytes(b"")
    code, _, err = _run("stylise", small_clip, "--style", STYLE, "--out", empty, "-q", "--width", "128",
                        "--iterations", "2", "--shots", "1")
    assert code == 0, err


def test_a_shot_selection_out_of_range_is_refused_before_the_folder_is_written_or_restarted(small_clip, tmp_path):
    out = tmp_path / "o"
    _one_line_error(*_run("stylise", small_clip, "--style", STYLE, "--out", out, "--shots", "7")[::2], "7")
    assert not (out / "framestyle.json").exists() and not (out / "render.log").exists()
    assert _run("stylise", small_clip, "--style", STYLE, "--out", out, "-q", *FAST, "--shots", "1")[0] == 0
    frames = {p.name: p.read_bytes() for p in out.glob("take_*.png")}
    code, _, err = _run("stylise", small_clip, "--style", STYLE, "--out", out, *FAST, "--shots", "0", "--restart")
    assert code == 2 and "Traceback" not in err
    assert {p.name: p.read_bytes() for p in out.glob("take_*.png")} == frames and len(frames) == 10


def test_bad_threads_scheduler_and_flow_preset_are_one_line_errors(small_clip, tmp_path):
    out = tmp_path / "o"
    _one_line_error(*_run("stylise", small_clip, "--style", STYLE, "--out", out, "--threads", "0")[::2], "--threads 0")
    # not an address (no port): Dask raises ValueError; nothing is written before the connection
    _one_line_error(*_run("stylise", small_clip, "--style", STYLE, "--out", out, "--scheduler", "nonsense")[::2],
                    "--scheduler nonsense")
    assert not out.exists()
    _one_line_error(*_run("stability", small_clip, "--source", small_clip, "--flow-preset", "bogus")[::2], "bogus")


def test_a_broken_json_shot_list_is_reported_as_json(small_clip, tmp_path):
    for name, text, words in (("cut.json", '{"shots": [', "not valid JSON"),
                              ("cut.txt", '{"shots": []}', "expected a JSON list of shots")):
        path = tmp_path / name
        path.write_text(text)
        code, _, err = _run("stylise", small_clip, "--style", STYLE, "--out", tmp_path / "o", "--shot-list", path)
        _one_line_error(code, err, name)
        assert words in err


@pytest.mark.parametrize("option, value, words", [
    ("--style-weight", "inf", "--style-weight: expected a finite number"),
    ("--temporal-weight", "1e300", "--temporal-weight: expected less than or equal to 1000000"),
    ("--style-mix", "inf,1", "--style-mix (value 1): expected a finite number"),
    ("--matte-softness", "1e9", "--matte-softness: expected less than or equal to 1000"),
    ("--stroke-size", "inf", "--stroke-size: expected a finite number"),
])
def test_an_infinite_or_overflowing_number_is_refused_before_anything_is_written(small_clip, tmp_path, option, value,
                                                                                  words):
    # these ran out of memory (matte softness) or ended in a NaN traceback after the render began
    code, _, err = _run("stylise", small_clip, "--style", STYLE, "--out", tmp_path / "o", *FAST, option, value)
    _one_line_error(code, err, words)
    assert not (tmp_path / "o").exists()


def test_a_stroke_size_whose_style_image_would_not_fit_in_memory_says_the_largest_that_does(small_clip, tmp_path):
    code, _, err = _run("stylise", small_clip, "--style", STYLE, "--out", tmp_path / "o", *FAST, "--stroke-size", "100")
    _one_line_error(code, err, "style.png")
    largest = float(err.split("--stroke-size ")[1].split()[0])
    # the 512×512 style beside a 128×72 frame: 2 million pixels is a 1414-pixel square, 11.04 × 128
    assert largest == 11.04
    assert not (tmp_path / "o").exists()


def test_a_style_image_too_narrow_for_the_network_names_the_file_and_the_stroke_size_that_works(small_clip, tmp_path):
    wide = tmp_path / "wide.png"
    cv2.imwrite(str(wide), np.full((20, 2000, 3), 128, np.uint8))
    code, _, err = _run("stylise", small_clip, "--style", wide, "--out", tmp_path / "o", *FAST)
    _one_line_error(code, err, "wide.png")
    size = float(err.split("--stroke-size ")[1].split()[0])
    # 64 px (the network's least side) over the 20 px side scaled as the 2000 px one is to 128: 50
    assert size == 50.0
    code, _, err = _run("stylise", small_clip, "--style", wide, "--out", tmp_path / "o", "-q", "--width", "128",
                        "--iterations", "2", "--shots", "1", "--stroke-size", str(size))
    assert code == 0, err
    thread = tmp_path / "thread.png"
    cv2.imwrite(str(thread), np.full((1, 5120, 3), 128, np.uint8))  # would need a stroke size of 2560
    code, _, err = _run("stylise", small_clip, "--style", thread, "--out", tmp_path / "p", *FAST)
    _one_line_error(code, err, "thread.png: a 5120×1 style image is too elongated")
    _one_line_error(*_run("stylise", small_clip, "--style", small_clip, "--out", tmp_path / "p", *FAST)[::2],
                    f"{small_clip}: a folder, not an image file")


def test_bad_input_never_touches_a_finished_render(small_clip, tmp_path):
    out = tmp_path / "done"
    assert _run("stylise", small_clip, "--style", STYLE, "--out", out, "-q", *FAST, "--shots", "2")[0] == 0
    before = {p.name: p.read_bytes() for p in out.iterdir() if p.is_file()}
    _one_line_error(*_run("stylise", small_clip, "--style", STYLE, "--out", out, "--width", "40")[::2], "width")
    code, _, err = _run("stylise", small_clip, "--style", STYLE, "--out", out, "--width", "100", "--iterations", "4")
    _one_line_error(code, err, "width")  # a changed setting is refused by name
    assert {p.name: p.read_bytes() for p in out.iterdir() if p.is_file()} == before


def test_a_prores_hand_off_is_added_to_a_finished_render_without_rendering_again(small_clip, tmp_path):
    out = tmp_path / "o"
    assert _run("stylise", small_clip, "--style", STYLE, "--out", out, "-q", *FAST)[0] == 0
    frames = {p.name: p.stat().st_mtime_ns for p in out.glob("take_*.png")}
    mov = out / f"{small_clip.name}_framestyle.mov"
    assert not mov.exists()
    code, stdout, err = _run("stylise", small_clip, "--style", STYLE, "--out", out, "-q", *FAST, "--prores")
    assert code == 0, err  # the same command with --prores: no "different settings (prores)"
    assert f"edit-ready ProRes with the source's timecode: {mov}" in stdout
    assert imageio_ffmpeg.count_frames_and_secs(str(mov))[0] == 20
    mov.unlink()
    code, _, err = _run("resume", out, "--prores", "-q")  # or from the output folder alone
    assert code == 0, err
    assert mov.exists()
    assert {p.name: p.stat().st_mtime_ns for p in out.glob("take_*.png")} == frames  # no frame written again
    assert store.read_manifest(out)["settings"]["prores"] is True
    assert "hand-off changed (prores True); the frames are kept" in (out / "render.log").read_text()


def test_an_edl_in_gives_a_render_that_follows_it_and_a_prores_hand_off_out(small_clip, tmp_path):
    # A 1001-numbered plate folder, an editor's cut as a CMX 3600 EDL (written by `shots
    # --edl` after moving the cut to 1006), a render that follows it, and an edit-ready .mov.
    plates = tmp_path / "plate"
    plates.mkdir()
    for k, p in enumerate(sorted(small_clip.glob("take_*.png"))):
        (plates / f"plate_{1001 + k}.png").write_bytes(p.read_bytes())
    edl = tmp_path / "cut.edl"
    code, out, err = _run("shots", plates, "--start-timecode", "01:00:00:00", "--add-cut", "1006",
                          "--remove-cut", "1011", "--edl", edl)
    assert code == 0, err
    assert "1001" in out and "01:00:00:00" in out
    code, out, err = _run("stylise", plates, "--style", STYLE, "--out", tmp_path / "o", *FAST, "--iterations", "2",
                          "--shot-list", edl, "--prores", "--fps", "25")
    assert code == 0, err
    assert "1001-1005" in out and "1006-1020" in out  # the summary speaks the plates' numbers
    assert [s["start"] for s in store.read_manifest(tmp_path / "o")["shots"]] == [0, 5]
    mov = tmp_path / "o" / "plate_framestyle.mov"
    report = subprocess.run([imageio_ffmpeg.get_ffmpeg_exe(), "-i", str(mov)], capture_output=True, text=True).stderr
    # ffmpeg's own stream report: Apple ProRes 422 HQ (fourcc apch), 10-bit 4:2:2, timecode
    assert "prores (HQ)" in report and "yuv422p10le" in report and "01:00:00:00" in report
    assert imageio_ffmpeg.count_frames_and_secs(str(mov))[0] == 20


@pytest.mark.parametrize(("text", "expected"), [
    ('styles = "paint.png"\n', "styles: expected a list"),
    ('strength = "half"\n', "strength: expected a number"),
    ('sparkle = 1\n', "sparkle: unknown setting"),
    ('levels = 0\n', "levels: expected greater than or equal to 1"),
    ('[shots.2]\nstroke_size = -1\n', "[shots.2]: stroke_size: expected greater than 0"),
    ('[shots.02]\nstrength = 0.0\n', "[shots.02]: write the shot number as 2"),  # it was read, then never applied
    ('[shots.2]\nprores = true\nfps = 30.0\n', "[shots.2]: fps, prores apply to the whole clip, not to one shot"),
    ('[shots.2]\nnetwork = "vgg19"\n', "[shots.2]: network applies to the whole clip"),
])
def test_a_look_file_with_a_wrong_value_is_one_line_naming_the_file_and_the_key(small_clip, tmp_path, text, expected):
    look = tmp_path / "bad.toml"
    look.write_text(f'styles = ["{STYLE}"]\n' + text if not text.startswith("styles") else text)
    code, _, err = _run("stylise", small_clip, "--look", look, "--out", tmp_path / "o")
    _one_line_error(code, err, "bad.toml")
    assert expected in err


def test_a_shot_look_that_does_not_fit_the_footage_names_its_shot(small_clip, tmp_path):
    look = tmp_path / "grade.toml"
    look.write_text(f'styles = ["{STYLE}"]\n[shots.2]\nwidth = 32\n')
    code, _, err = _run("stylise", small_clip, "--look", look, "--out", tmp_path / "o")
    _one_line_error(code, err, "[shots.2] width 32: the working frame would be 32×18")
    assert not (tmp_path / "o").exists()


def test_an_option_given_overrides_the_look_but_a_shots_own_table_decides_for_it_and_says_so(small_clip, tmp_path):
    look = tmp_path / "grade.toml"
    look.write_text(f'styles = ["{STYLE}"]\nstrength = 1.0\n[shots.2]\nstrength = 1.0\n')
    code, out, err = _run("stylise", small_clip, "--look", look, "--out", tmp_path / "o", *FAST, "--strength", "0")
    assert code == 0, err
    assert "the look's [shots.2] sets strength for shot 2; the option(s) given apply to the other shots" in out + err
    # shot 1: the option's strength 0 is the footage; shot 2: its own table's full style
    assert np.array_equal(cv2.imread(str(tmp_path / "o" / "take_003.png")), cv2.imread(str(small_clip / "take_003.png")))
    assert not np.array_equal(cv2.imread(str(tmp_path / "o" / "take_015.png")),
                              cv2.imread(str(small_clip / "take_015.png")))


def test_the_readme_look_example_loads_and_a_shot_or_option_giving_styles_mixes_them_equally(small_clip, tmp_path):
    # The README's "Look files" example: two styles mixed 0.7/0.3, and a shot given one style of
    # its own, whose weights are then its own (equal), not the two left over from the top
    for name in ("collage.png", "ink.png"):
        (tmp_path / name).write_bytes(STYLE.read_bytes())
    look = tmp_path / "look.toml"
    look.write_text('styles = ["collage.png", "ink.png"]\nstyle_mix = [0.7, 0.3]\nstyle_weight = 8.0\n'
                    'colour = "luma"\nwidth = 640\n\n[shots.2]\nstyles = ["collage.png"]\nstrength = 0.5\n')
    code, _, err = _run("preview", small_clip, "--look", look, "--out", tmp_path / "p", "--width", "128",
                        "--every", "20", "--shots", "2", "-q")
    assert code == 0, err
    # a style given on the command line takes the place of the look's two, and their weights with them
    code, _, err = _run("preview", small_clip, "--look", look, "-s", STYLE, "--out", tmp_path / "p", "--width",
                        "128", "--every", "20", "--shots", "2", "-q")
    assert code == 0, err


@pytest.mark.parametrize(("options", "words"), [
    (["--style-mix", "0.5"], "no style image: give --style or a look file with styles"),  # not "needs 0 weights"
    (["-s", STYLE, "--style-mix", "0.5,0.5"], "--style-mix: needs 1 weight, one per style, not 2"),
    (["-s", STYLE, "-s", STYLE, "--style-mix", "0,0"], "--style-mix: the weights are all 0"),
    (["-s", STYLE, "--stroke-size", "0"], "framestyle: error: --stroke-size: expected greater than 0"),  # its own name
    (["-s", STYLE, "--strength", "nan"], "--strength: expected a finite number (got nan)"),
    (["-s", STYLE, "--matte", ""], "matte: give a folder of matte frames or 'alpha'"),  # was a traceback mid-render
    (["-s", STYLE, "--style-mix", ""], "--style-mix '': expected numbers like 0.7,0.3"),  # was silently equal
    (["-s", STYLE, "--matte", "alpha"], "the matte is to be the input's alpha, but the input has no alpha channel"),
    # a sweep: --fps 1e308 crashed the flash check after the frames were written
    (["-s", STYLE, "--fps", "1e308"], "--fps: expected less than or equal to 1000"),
])
def test_style_and_matte_options_that_cannot_work_are_one_line_before_anything_is_written(small_clip, tmp_path,
                                                                                           options, words):
    code, _, err = _run("stylise", small_clip, *options, "--out", tmp_path / "o")
    _one_line_error(code, err, words)
    assert not (tmp_path / "o").exists()


@pytest.mark.parametrize("width", ["-5", "0"])
def test_a_preview_width_below_1_is_one_line(small_clip, tmp_path, width):
    code, _, err = _run("preview", small_clip, "-s", STYLE, "--out", tmp_path / "p", "--width", width)
    _one_line_error(code, err, f"--width {width}: must be 1 or more")


def test_a_matte_folder_numbered_with_a_gap_the_input_lacks_is_refused(small_clip, tmp_path):
    # paired in order, matte 0013 would have gone with take_012: every frame after the gap a frame off
    mattes = tmp_path / "mattes"
    mattes.mkdir()
    frames = sorted(small_clip.glob("take_*.png"))
    white = np.full(cv2.imread(str(frames[0])).shape, 255, np.uint8)
    for n in [*range(1, 12), *range(13, len(frames) + 2)]:
        cv2.imwrite(str(mattes / f"matte_{n:04d}.png"), white)
    code, _, err = _run("stylise", small_clip, "-s", STYLE, "--matte", mattes, "--out", tmp_path / "o", *FAST)
    _one_line_error(code, err, "its numbering skips where the input's does not (matte_0013.png would go with take_012.png)")


@pytest.fixture
def no_gpu(monkeypatch):
    """A machine where torch sees no GPU, whatever this one has (the tests run on the CPU)."""
    monkeypatch.setattr(network, "gpus_seen", lambda: {"cuda": False, "mps": False})


def test_device_cpu_gives_the_default_frames(small_clip, tmp_path, no_gpu):
    # Without a GPU, --device auto is the CPU: the same frames, bit for bit.
    clip = tmp_path / "clip"
    clip.mkdir()
    for path in sorted(small_clip.glob("*.png"))[:3]:  # a warm-started frame after the first, and its next
        (clip / path.name).write_bytes(path.read_bytes())
    for out, extra in (("default", []), ("cpu", ["--device", "cpu"])):
        code, _, err = _run("stylise", clip, "--style", STYLE, "--out", tmp_path / out, "-q", *FAST, *extra)
        assert code == 0, err
    names = sorted(p.name for p in (tmp_path / "default").glob("take_*.png"))
    assert len(names) == 3
    for name in names:
        assert np.array_equal(cv2.imread(str(tmp_path / "default" / name)), cv2.imread(str(tmp_path / "cpu" / name)))


def test_a_gpu_torch_cannot_see_and_unknown_device_or_precision_are_one_line_errors(small_clip, tmp_path, no_gpu):
    for option, value in (("--device", "cuda"), ("--device", "mps"), ("--device", "tpu"), ("--precision", "float16")):
        _one_line_error(*_run("stylise", small_clip, "--style", STYLE, "--out", tmp_path / "o", option, value)[::2],
                        value)
    assert not (tmp_path / "o").exists()
