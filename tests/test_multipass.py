"""Multi-pass rendering (Ruder, Dosovitskiy & Brox 2016): the blend of a later pass's start,
and a multi-pass render that survives a kill at any write with bit-identical frames."""

import shutil

import numpy as np
import pytest
import torch

from framestyle import store
from framestyle.motion import FlowPair
from framestyle.temporal import BLEND, pass_problem, pass_start

from conftest import STYLE
from faults import Hook, in_groups, prepare_parent, run_all, run_cli


def test_pass_start_follows_the_papers_blend_on_a_worked_example():
    # Ruder, Dosovitskiy & Brox (2016), multi-pass algorithm: x' = δ c∘ω(x_n) + (δ̄ 1 + δ c̄)∘x_prev,
    # δ̄ = 1 − δ, c̄ = 1 − c; δ = 0.5 in the paper's experiments (from memory).
    previous = np.array([[[0.2] * 3, [0.2] * 3, [0.2] * 3]], np.float32)  # (1, 3, 3): own last result
    warped = np.array([[[1.0] * 3, [1.0] * 3, [1.0] * 3]], np.float32)  # the warped neighbour
    mask = np.array([[1.0, 0.0, 0.5]], np.float32)  # reliable, disoccluded, half
    start = pass_start(previous, warped, mask, 0.5)
    # c = 1: 0.5·1.0 + 0.5·0.2 = 0.6; c = 0: the frame's own 0.2; c = 0.5: 0.25·1.0 + 0.75·0.2 = 0.4
    np.testing.assert_allclose(start[0, :, 0], [0.6, 0.2, 0.4], atol=1e-6)
    # δ = 1 takes the neighbour wherever it is reliable, δ = 0 keeps the frame's own result
    np.testing.assert_allclose(pass_start(previous, warped, mask, 1.0)[0, :, 0], [1.0, 0.2, 0.6], atol=1e-6)
    np.testing.assert_allclose(pass_start(previous, warped, mask, 0.0), previous)
    assert BLEND == 0.5
    with pytest.raises(ValueError):
        pass_start(previous, warped, mask, 1.5)


def test_a_later_pass_starts_from_the_blend_and_is_tied_to_the_warped_neighbour_by_its_mask():
    rng = np.random.default_rng(0)
    h, w = 24, 32
    content, previous, neighbour = (rng.random((h, w, 3), dtype=np.float32) for _ in range(3))
    flows = FlowPair(np.zeros((h, w, 2), np.float32), np.zeros((h, w, 2), np.float32))  # no motion
    problem = pass_problem(content, previous, (flows, neighbour))
    # no motion: every pixel reliable, the warp is the identity, the start is the plain δ-blend
    np.testing.assert_allclose(problem.init[0].permute(1, 2, 0).numpy(), 0.5 * neighbour + 0.5 * previous, atol=1e-6)
    (target, weight), = problem.temporal
    np.testing.assert_array_equal(target[0].permute(1, 2, 0).numpy(), neighbour)
    assert torch.equal(weight, torch.ones(1, 1, h, w))
    alone = pass_problem(content, previous, None)  # the first frame of a pass
    np.testing.assert_array_equal(alone.init[0].permute(1, 2, 0).numpy(), previous)
    assert alone.temporal == []


@pytest.fixture(scope="module")
def short_shot(small_clip, tmp_path_factory):
    """The first two frames of the small clip: one shot."""
    folder = tmp_path_factory.mktemp("short") / "frames"
    folder.mkdir()
    for path in sorted(small_clip.glob("take_*.png"))[:2]:
        shutil.copy(path, folder / path.name)
    prepare_parent(_args(folder, folder.parent / "warm_up"))
    return folder


def _args(clip, out):
    return ["stylise", clip, "--style", STYLE, "--out", out, "--width", "128", "--iterations", "2",
            "--tolerance", "0", "--passes", "3", "--pass-iterations", "2", "--warp-filter", "cubic", "-q"]


def test_a_multi_pass_render_killed_at_any_write_resumes_inside_its_pass_bit_identical(short_shot, tmp_path):
    # The crash loop of tests/test_store.py (SQLite's crash testing) over a 3-pass render of
    # two frames: the forward pass, a backward pass, a forward pass, then the delivery in
    # order. Every other write keeps the loop short; each write kind recurs once per frame and
    # pass, so both parities of the pattern are hit.
    ref = tmp_path / "reference"
    code, err, writes = run_cli(_args(short_shot, ref))
    assert code == 0, err
    frames = {p.name: p.read_bytes() for p in ref.glob("take_*.png")}
    assert len(frames) == 2 and "pass 3 of 3 done" in (ref / store.LOG).read_text()
    for group in in_groups(list(range(1, writes + 1, 2))):  # a few crashes at once, each in its own folder
        outs = {n: tmp_path / f"crash_{n}" for n in group}
        assert [code for code, _, _ in run_all([(_args(short_shot, outs[n]), Hook(n)) for n in group])] == [99] * len(group)
        stamps = {}
        for n, out in outs.items():
            finished = store.Store(out).finished() if (out / store.MANIFEST).exists() else {}
            stamps[n] = {name: (out / name).stat().st_mtime_ns for name in finished}
        for n, (code, err, _) in zip(group, run_all([(_args(short_shot, outs[n]), None) for n in group])):
            out = outs[n]
            assert code == 0 and "Traceback" not in err, f"after a crash at write {n}: {err}"
            assert {p.name: p.read_bytes() for p in out.glob("take_*.png")} == frames, f"after a crash at write {n}"
            assert {name: (out / name).stat().st_mtime_ns for name in stamps[n]} == stamps[n], "a finished frame was rewritten"
            assert not list(out.rglob("*.npy")) and not [p for p in out.rglob("*") if ".tmp-" in p.name]
            assert "pending" not in store.Store(out).records()[1]
            shutil.rmtree(out)
