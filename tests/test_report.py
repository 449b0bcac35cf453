"""The render report: written as a render goes, its figures true to the records and to the
stability measure, cheap to refresh, regenerated for any folder, and shown by a real browser."""

import json
import os
import re
import shutil
import subprocess
from pathlib import Path

import cv2
import numpy as np
import pytest
from typer.testing import CliRunner

from framestyle import io, pipeline, store
from framestyle.cli import app
from framestyle.qc.stability import sequence_warping_error, stability
from framestyle.report import refresh_report
from framestyle.report.figures import shot_plot
from framestyle.report.status import render_status, shot_series
from framestyle.settings import Settings
from framestyle.shots import Shot
from framestyle.shots.cutlists import clip_timecode

from conftest import fast_settings

runner = CliRunner()


@pytest.fixture(scope="module")
def rendered(small_clip, tmp_path_factory):
    """The small clip rendered as shots 1-10, 11-16 and 17-20, and the report's page as it
    stood when each shot started and when each was done."""
    out = tmp_path_factory.mktemp("report") / "out"
    shot_list = out.parent / "shots.txt"
    shot_list.write_text("1\n11\n17\n")
    pages = {}

    def progress(event, **info):
        if event == "shot_start":
            pages[("start", info["shot"])] = (out / store.REPORT).read_text()
        elif event == "shot":
            pages[("done", info["summary"].shot.index)] = (out / store.REPORT).read_text()

    pipeline.render(small_clip, out, fast_settings(iterations=1), shot_file=shot_list, progress=progress)
    return out, pages


def _render_inputs(out: Path, source_path: Path):
    """What a refresh of ``out``'s report needs: source, settings, timecode (from the manifest)."""
    manifest = store.read_manifest(out)
    settings = Settings.from_dict(manifest["settings"])
    source = io.open_source(source_path)
    return source, settings, clip_timecode(source, settings)


def _copy(out: Path, tmp_path: Path) -> Path:
    copy = tmp_path / "copy"
    shutil.copytree(out, copy)
    return copy


def _shots(out: Path) -> list[Shot]:
    return [Shot(s["shot"], s["start"], s["end"]) for s in store.read_manifest(out)["shots"]]


def test_a_render_writes_its_report_when_it_starts_and_after_every_shot(rendered):
    out, pages = rendered
    first = pages[("start", 1)]  # written when the render started
    assert "0 / 20" in first and first.count("not started") == 6  # table and section of each shot
    after_one = pages[("done", 1)]
    assert "10 / 20" in after_one and "shot_001_plot.png" in after_one and "shot_002_plot.png" not in after_one
    final = (out / store.REPORT).read_text()
    assert "20 / 20" in final and "3 / 3" in final and ">done<" in final
    for name in ("shot_001_strip.png", "shot_001_plot.png", "shot_003_strip.png", "shot_003_plot.png", "style_1.png"):
        assert f"report/{name}?v=" in final
        assert cv2.imread(str(out / store.REPORT_FILES / name)) is not None
    assert "<script" not in final  # readable without JavaScript


def test_frames_solved_apart_are_left_out_of_the_stability_measure(small_clip, tmp_path):
    # A white frame inside a shot (a music video's flash frame): the flow to and from it is
    # still, so its pairs counted its whole change, in render and source alike, and the shot's
    # figure said nothing of the paint's stability. The render solves it apart; the measure
    # leaves it out and measures the pair across it.
    clip = tmp_path / "clip"
    clip.mkdir()
    for k in range(1, 11):
        shutil.copy(small_clip / f"take_{k:03d}.png", clip / f"take_{k:03d}.png")
    cv2.imwrite(str(clip / "take_005.png"), np.full((72, 128, 3), 255, np.uint8))
    listing = tmp_path / "one_shot.txt"
    listing.write_text("1\n")
    out = tmp_path / "out"
    pipeline.render(clip, out, fast_settings(iterations=2), shot_file=listing)
    assert [name for name, e in store.Store(out).finished().items() if e["odd"]] == ["take_005.png"]
    row = stability(out, clip)[0]
    frame = lambda folder, k: cv2.imread(str(folder / f"take_{k:03d}.png"))[..., ::-1].astype(np.float32) / 255
    kept = [k for k in range(1, 11) if k != 5]
    assert row.render == pytest.approx(sequence_warping_error([frame(out, k) for k in kept], [frame(clip, k) for k in kept]))
    assert row.source == pytest.approx(sequence_warping_error([frame(clip, k) for k in kept], [frame(clip, k) for k in kept]))
    with_it = sequence_warping_error([frame(out, k) for k in range(1, 11)], [frame(clip, k) for k in range(1, 11)])
    assert row.render < with_it / 10
    # the report's shot row leaves it out too: the means of the records, as the command line says
    # them (it measured the pairs into and out of the white frame, 8 times the figure on footage)
    entries = store.Store(out).finished().values()
    cells = re.search(r'<td class="num">[\d.]+</td><td class="num">([\d.]+)</td><td class="num">([\d.]+)</td>',
                      (out / store.REPORT).read_text())
    for cell, key in zip(cells.groups(), ("warp_error", "source_warp_error")):
        assert float(cell) == pytest.approx(np.mean([e[key] for e in entries if e[key] is not None]), abs=6e-6)


def test_the_figures_match_the_shot_records_and_the_stability_measure(rendered, small_clip):
    out, _ = rendered
    source = io.open_source(small_clip)
    names = store.output_names(source)
    records = store.Store(out).records()
    page = (out / store.REPORT).read_text()
    # The stability measure: the warping error of Lai et al. (2018) as `framestyle stability`
    # measures it, from the frames on disk (the working size is the source's 128×72 here).
    measured = {row.shot.index: row for row in stability(out, small_clip)}
    for shot in _shots(out):
        frames = records[shot.index]["frames"]
        series = shot_series(shot, names, source.numbers, frames)
        entries = [frames[names[i]] for i in range(shot.start, shot.end + 1)]
        assert series.render_error == tuple(e["warp_error"] for e in entries)
        assert series.source_error == tuple(e["source_warp_error"] for e in entries)
        assert series.iterations == tuple(e["iterations"] for e in entries)
        for errors in (series.render_error, series.source_error):
            assert errors[0] is None and all(e is not None for e in errors[1:])  # no pair before a shot's first frame
        # the source's own error, recorded while rendering along the temporal loss's flows,
        # averages over the shot's frame pairs to the measure's figure
        assert series.mean_error("source") == pytest.approx(measured[shot.index].source, rel=1e-6)
        # the render's, recorded from the full-precision frames, against the delivered 8-bit PNGs
        assert series.mean_error("render") == pytest.approx(measured[shot.index].render, rel=0.05)
        # what the plot draws is those figures
        error_axis, iteration_axis, seconds_axis = shot_plot(series).axes
        source_line, render_line = error_axis.get_lines()[:2]
        np.testing.assert_array_equal(render_line.get_xdata(), [source.numbers[i] for i in range(shot.start, shot.end + 1)])
        np.testing.assert_array_equal(render_line.get_ydata()[1:], series.render_error[1:])
        np.testing.assert_array_equal(source_line.get_ydata()[1:], series.source_error[1:])
        assert [bar.get_height() for bar in iteration_axis.patches] == list(series.iterations)
        assert [bar.get_height() for bar in seconds_axis.patches] == list(series.seconds)
        # and the page's table says them
        assert f"{series.mean_error('render'):.5f}" in page and f"{series.mean_error('source'):.5f}" in page


def test_the_status_counts_frames_and_shots_and_paces_the_time_left_on_the_last_frames():
    start = 1767225600.0  # 2026-01-01 00:00:00 UTC in seconds since the epoch (from memory)
    manifest = {"created": "2026-01-01T00:00:00+0000",
                "shots": [{"shot": 1, "start": 0, "end": 9}, {"shot": 2, "start": 10, "end": 29}]}
    frames = {f"f{i}": {"seconds": 3.0, "iterations": 5, "finished": start + 100 + 2 * i} for i in range(11)}
    records = {1: {"frames": {k: v for k, v in frames.items() if k != "f10"}}, 2: {"frames": {"f10": frames["f10"]}}}
    status = render_status(manifest, records)
    assert (status.frames_done, status.frames_total, status.shots_done, status.shots_total) == (11, 30, 1, 2)
    assert status.render_seconds == 33.0
    # 11 frames finished 2 s apart: 2 s a frame, 19 frames left → 38 s (worked by hand)
    assert status.seconds_per_frame == 2.0 and status.eta_seconds == 38.0
    assert status.started == start and status.elapsed == 120.0  # to the last frame, finished at +120 s
    older = {n: {"frames": {k: {"seconds": v["seconds"], "iterations": 5} for k, v in r["frames"].items()}}
             for n, r in records.items()}  # records of a render before finishing times were kept
    assert render_status(manifest, older).eta_seconds == 19 * 3.0  # one process's mean pace


def test_a_refresh_redraws_only_the_shots_whose_records_changed_and_measures_nothing_twice(
        rendered, small_clip, tmp_path, monkeypatch):
    out = _copy(rendered[0], tmp_path)
    inputs = _render_inputs(out, small_clip)
    pictures = out / store.REPORT_FILES
    assert not list(pictures.glob("*.json"))  # the render recorded every warping error: none measured here

    def stamps():
        return {p.name: p.stat().st_mtime_ns for p in pictures.iterdir()}

    def measure_again(*args, **kwargs):
        raise AssertionError("a frame pair was measured again")

    monkeypatch.setattr("framestyle.report.pair_warping_error", measure_again)
    before = stamps()
    refresh_report(out, *inputs)
    assert stamps() == before  # nothing changed: only the page is written
    record = out / ".framestyle" / "shots" / "shot_002.json"
    os.utime(record, ns=(record.stat().st_atime_ns, before["shot_002_plot.png"] + 1))  # shot 2 changed since
    refresh_report(out, *inputs)
    after = stamps()
    assert after["shot_002_plot.png"] > before["shot_002_plot.png"]
    assert after["shot_002_strip.png"] > before["shot_002_strip.png"]
    assert {k: v for k, v in after.items() if not k.startswith("shot_002_")} == \
        {k: v for k, v in before.items() if not k.startswith("shot_002_")}


def test_a_finished_render_without_its_flash_record_is_said_unchecked_not_passed(rendered, small_clip, tmp_path):
    out = _copy(rendered[0], tmp_path)
    page = (out / store.REPORT).read_text()
    assert "render: not checked" not in page and 'class="pass">pass</span><ul><li>render:' in page
    record = out / ".framestyle" / "flashes" / "render.json"
    record.unlink()
    for _ in ("deleted", "damaged"):
        refresh_report(out, *_render_inputs(out, small_clip))
        page = (out / store.REPORT).read_text()
        assert '<span class="fail">render: not checked</span>' in page and "<li>source:" in page
        record.write_text("{")


def test_a_shot_with_a_look_of_its_own_says_what_differs(rendered, small_clip, tmp_path):
    out = _copy(rendered[0], tmp_path)
    manifest = json.loads((out / store.MANIFEST).read_text())
    manifest["settings"]["shot_looks"] = {"2": {"strength": 0.5, "colour": "luma"}}  # as a look file's [shots.2]
    (out / store.MANIFEST).write_text(json.dumps(manifest))
    refresh_report(out, *_render_inputs(out, small_clip))
    page = (out / store.REPORT).read_text()
    assert "<li>shot 2: colour luma, strength 0.5</li>" in page and "Own look: colour luma, strength 0.5" in page
    assert page.count("Own look:") == 1


def test_framestyle_report_regenerates_an_interrupted_render_and_a_farm_worker_refreshes_it(
        rendered, small_clip, tmp_path):
    out = _copy(rendered[0], tmp_path)
    source = io.open_source(small_clip)
    for name in store.output_names(source)[16:]:  # as if killed before shot 3 finished a frame
        (out / name).unlink()
    (out / ".framestyle" / "shots" / "shot_003.json").unlink()
    shutil.rmtree(out / store.REPORT_FILES)
    (out / store.REPORT).unlink()
    result = runner.invoke(app, ["report", str(out)])
    assert result.exit_code == 0, result.stderr
    assert result.stdout.strip() == str(out / store.REPORT)
    page = (out / store.REPORT).read_text()
    assert "16 / 20" in page and "2 / 3" in page and "not started" in page and "shot_003_plot" not in page
    assert "stopped" in page and "no process renders it now" in page  # killed: no time left to promise
    with store.Store(out).shot(3, wait=False):  # a process renders shot 3: its lock is held
        assert store.Store(out).rendering([1, 2, 3]) == [3]
        assert runner.invoke(app, ["report", str(out)]).exit_code == 0
        assert "no process renders it now" not in (out / store.REPORT).read_text()
    assert store.Store(out).rendering([1, 2, 3]) == []
    # a farm worker runs render_shot alone: the report follows the shot it finished
    manifest = store.read_manifest(out)
    plan = pipeline.plan_render(small_clip, out, Settings.from_dict(manifest["settings"]),
                                shot_file=Path(manifest["shot_list"]["file"]))
    pipeline.render_shot(plan, 3, check_flashes=True)  # as farm._shot_task calls it
    page = (out / store.REPORT).read_text()
    assert "20 / 20" in page and "shot_003_plot.png" in page
    assert 'Flash check of this shot: render <span class="pass">pass</span>' in page  # the worker's shot check


def test_a_render_without_temporal_consistency_is_measured_on_its_delivered_frames(small_clip, tmp_path):
    out, shot_list = tmp_path / "out", tmp_path / "shots.txt"
    shot_list.write_text("1\n5\n")  # a 4-frame shot 1
    pipeline.render(small_clip, out, fast_settings(iterations=1, temporal=False), shot_file=shot_list, shots="1")
    source = io.open_source(small_clip)
    shot = _shots(out)[0]
    kept = json.loads((out / store.REPORT_FILES / "shot_001.json").read_text())  # what the report measured
    series = shot_series(shot, store.output_names(source), source.numbers, store.Store(out).records()[1]["frames"],
                         kept)
    # the stability measure of the same frames (Lai et al. 2018), read back from disk
    frames = [io.read_image(out / name) for name in store.output_names(source)[:4]]
    sources = [f for _, f in io.iter_frames(source, 0, 4)]
    assert series.mean_error("render") == pytest.approx(sequence_warping_error(frames, sources), rel=1e-6)
    assert series.mean_error("source") == pytest.approx(sequence_warping_error(sources, sources), rel=1e-6)
    assert "render (delivered frames)" in (out / store.REPORT).read_text()


def test_a_folder_with_only_a_preview_reports_its_contact_sheets_and_bad_folders_are_one_line(tmp_path):
    folder = tmp_path / "look"
    (folder / store.PREVIEW).mkdir(parents=True)
    io.write_image(folder / store.PREVIEW / "contact_shot001.png", np.full((40, 60, 3), 0.5, np.float32))
    result = runner.invoke(app, ["report", str(folder)])
    assert result.exit_code == 0, result.stderr
    page = (folder / store.REPORT).read_text()
    assert 'src="preview/contact_shot001.png"' in page and "a preview only" in page
    (tmp_path / "empty").mkdir()
    for bad, words in ((tmp_path / "empty", "no render and no preview"), (tmp_path / "missing", "not found")):
        result = runner.invoke(app, ["report", str(bad)])
        lines = result.stderr.strip().splitlines()
        assert result.exit_code == 2 and len(lines) == 1 and words in lines[0] and str(bad) in lines[0]


def test_headless_chromium_shows_the_report_with_its_strips_plots_and_style(rendered, tmp_path):
    out, _ = rendered
    browser = shutil.which("chromium") or shutil.which("chromium-browser")
    assert browser, "Chromium is needed for this test: apt-get install chromium (.ci/run installs it)"
    screenshot = tmp_path / "page.png"
    subprocess.run([browser, "--headless", "--no-sandbox", "--disable-gpu", "--hide-scrollbars",
                    "--force-device-scale-factor=1", f"--user-data-dir={tmp_path / 'profile'}",
                    f"--screenshot={screenshot}", "--window-size=1280,5000", (out / store.REPORT).as_uri()],
                   capture_output=True, timeout=120, check=True)
    page = cv2.imread(str(screenshot))
    assert page is not None and page.shape[:2] == (5000, 1280)
    assert page.std() > 20  # not a blank page
    # Each picture appears in the page at its own size: found by template matching (OpenCV's
    # normalised squared difference, 0 for an exact match). A picture that failed to load
    # shows as its alt text and a broken-image icon, far from it.
    found = []
    for name in ("style_1.png", "shot_001_strip.png", "shot_001_plot.png", "shot_003_strip.png", "shot_003_plot.png"):
        picture = cv2.imread(str(out / store.REPORT_FILES / name))
        scores = cv2.matchTemplate(page, picture, cv2.TM_SQDIFF_NORMED)
        score, _, (x, y), _ = cv2.minMaxLoc(scores)
        assert score < 0.01, f"{name} is not shown (best match {score:.3f} at {x},{y})"
        found.append(y)
    assert found == sorted(found)  # in the page's order: the look, shot 1, shot 3
