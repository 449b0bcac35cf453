"""The per-frame solver on a real sample frame: style appears, content stays, runs repeat."""

from pathlib import Path

import numpy as np
import pytest
import torch

from framestyle.io import read_image
from framestyle.style.network import load_network
from framestyle.imaging import resize, to_array, to_tensor
from framestyle.temporal import fresh_problem, start_noise
from framestyle.settings import Settings
from framestyle.style.solver import Problem, SolverParams, solve, style_targets

CLIP = Path(__file__).resolve().parents[1] / "sample_clip"
SIZE = (160, 90)


@pytest.fixture(scope="module")
def setup():
    net = load_network("efficientnet-lite0")
    style = to_tensor(resize(read_image(CLIP / "style.png"), (160, 160)))
    targets = style_targets(net, [style], [1.0], net.style_layers)
    content = resize(read_image(CLIP / "frames" / "drift_0001.png"), SIZE)
    return net, targets, content


def _problem(content, seed=0):
    return fresh_problem(content, start_noise((1, 3, SIZE[1], SIZE[0]), seed, 0))


def test_style_loss_falls_tenfold_while_the_content_stays(setup):
    # Gatys et al. 2016: optimising the image lowers the Gram-matrix style loss while the
    # content loss keeps the scene; we require an order of magnitude on the style side.
    net, targets, content = setup
    # A bold look (style weight 10; the default 5 with its smoothing term gives about 9.5×).
    settings = SolverParams(iterations=80, tolerance=0.0, style_weight=10.0)
    frame = to_tensor(content)
    _, before = solve(net, Problem(frame, frame), targets, settings, iterations=1)  # the content frame
    image, after = solve(net, _problem(content), targets, settings)
    assert after.style < before.style / 10
    corr = np.corrcoef(to_array(image).mean(axis=2).ravel(), content.mean(axis=2).ravel())[0, 1]
    assert corr > 0.5  # the scene is still recognisable in the stylised frame


def test_the_same_seed_gives_the_same_frame_and_another_seed_does_not(setup):
    net, targets, content = setup
    settings = SolverParams(iterations=10)
    a, _ = solve(net, _problem(content, 0), targets, settings)
    b, _ = solve(net, _problem(content, 0), targets, settings)
    c, _ = solve(net, _problem(content, 1), targets, settings)
    assert torch.equal(a, b)
    assert not torch.equal(a, c)


def test_a_converged_start_stops_early(setup):
    # Convergence-based stopping: a frame that starts at a solution needs few iterations.
    net, targets, content = setup
    settings = SolverParams(iterations=200, tolerance=0.01)
    image, first = solve(net, _problem(content), targets, settings)
    _, again = solve(net, Problem(to_tensor(content), image), targets, settings)
    assert again.iterations < first.iterations / 2
    assert again.iterations <= 30


def test_style_targets_mix_gram_matrices_by_weight(setup):
    net, _, _ = setup
    a, b = torch.rand(1, 3, 64, 64), torch.rand(1, 3, 64, 64) * 0.5
    ga = style_targets(net, [a], [1.0], ["stem"])["stem"]
    gb = style_targets(net, [b], [1.0], ["stem"])["stem"]
    mixed = style_targets(net, [a, b], [3.0, 1.0], ["stem"])["stem"]
    torch.testing.assert_close(mixed, 0.75 * ga + 0.25 * gb)
