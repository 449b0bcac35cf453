"""A warm-started frame's start (framestyle.temporal.temporal_problem)."""

import numpy as np
import torch
from skimage.exposure import match_histograms as skimage_match_histograms

from framestyle.imaging import to_tensor
from framestyle.motion import FlowPair, warp
from framestyle.temporal import temporal_problem

H, W, DX = 24, 32, 3


def test_the_start_is_the_warped_frame_except_the_picture_that_entered_across_the_edge():
    rng = np.random.default_rng(0)
    content = 0.3 * rng.random((H, W, 3), np.float32)  # dark footage, painted light
    stylised = 0.5 + 0.5 * rng.random((H, W, 3), np.float32)
    backward = np.zeros((H, W, 2), np.float32)
    backward[..., 0] = DX  # the camera pans: the last DX columns are new picture
    forward = -backward.copy()
    forward[8:16, 8:16] = 0.0  # an inconsistent patch: the forward-backward check fails there
    flows = FlowPair(backward, forward)
    noise = torch.full((1, 3, H, W), 0.05)

    problem = temporal_problem(content, [(flows, stylised)], noise)

    warped = to_tensor(np.clip(warp(stylised, backward, "linear"), 0, 1))
    mask = flows.current_mask()
    assert (mask[:, : W - DX] == 0).any()  # the patch (shifted by the flow) is unreliable...
    # ...yet starts from the warped frame, like every pixel whose flow stays in the picture;
    torch.testing.assert_close(problem.init[..., : W - DX], warped[..., : W - DX])
    # the entering columns start from the footage in the warped frame's colours (per-channel
    # histogram matching, checked against scikit-image's) plus noise, not in the footage's own;
    painted = skimage_match_histograms(content, warp(stylised, backward, "linear")[:, : W - DX], channel_axis=-1)
    torch.testing.assert_close(problem.init[..., W - DX :], to_tensor(painted.astype(np.float32))[..., W - DX :] + 0.05)
    assert float(problem.init[..., W - DX :].min()) > 0.5 + 0.05 - 1e-6
    # and the temporal loss holds only the reliable pixels.
    torch.testing.assert_close(problem.temporal[0][1], torch.from_numpy(mask)[None, None])
