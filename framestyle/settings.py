"""All render settings in one dataclass, with the defaults a user would pick.

The CLI builds a :class:`Settings`; the library consumes it. It is saved beside the output
(``settings.json``) and hashed into the manifest so a resumed render provably uses the same
settings as the one it continues.
"""

from __future__ import annotations

import dataclasses
import hashlib
import json
from dataclasses import dataclass
from pathlib import Path

from .errors import FramestyleError


@dataclass(frozen=True)
class Settings:
    # --- look -------------------------------------------------------------------------------
    styles: tuple[str, ...] = ()  # style image paths; several are mixed at the Gram level
    style_mix: tuple[float, ...] = ()  # one weight per style image (empty: equal weights)
    style_weight: float = 5.0  # weight of the relative Gram style loss
    content_weight: float = 1.0  # weight of the relative content loss
    tv_weight: float = 10.0  # total-variation weight: suppresses pixel-level speckle
    style_scale: float = 1.0  # stroke size: style image resized to this × the working size
    # --- network and solver -----------------------------------------------------------------
    network: str = "efficientnet-lite0"  # perceptual network (see framestyle.network.NETWORKS)
    weights: str | None = None  # a state_dict file instead of the network's default weights
    style_layers: tuple[str, ...] = ()  # empty: the network's default style layers
    content_layer: str = ""  # empty: the network's default content layer
    width: int = 480  # working width in pixels (never above the source width)
    iterations: int = 300  # most L-BFGS iterations for one frame
    tolerance: float = 0.01  # stop when the loss falls by less than this fraction in 10 iterations
    seed: int = 0  # seeds the noise added where a frame starts from its content
    # --- temporal stability (Ruder et al. 2016) -----------------------------------------------
    temporal: bool = True  # warm start from the warped previous frame + temporal losses
    temporal_weight: float = 50.0  # weight of the (short- and long-term) temporal loss
    long_term: tuple[int, ...] = (1, 10, 20, 40)  # frames back tied by the temporal loss
    flow_preset: str = "medium"  # DIS optical flow preset: ultrafast, fast, medium
    # --- shots ------------------------------------------------------------------------------
    shot_detection: bool = True  # restart the temporal chain at detected cuts
    cut_threshold: float = 0.4  # colour-histogram distance (0..1) above which a frame is a cut
    gradual_threshold: float = 0.4  # end-to-end distance that makes a fade or dissolve a boundary

    def to_dict(self) -> dict:
        """Plain JSON-able dict of every field (tuples as lists)."""
        return dataclasses.asdict(self)

    def digest(self) -> str:
        """A short hash of the settings; a resumed render must match it exactly."""
        blob = json.dumps(self.to_dict(), sort_keys=True).encode()
        return hashlib.sha256(blob).hexdigest()[:16]

    @classmethod
    def from_dict(cls, d: dict, source: str = "settings") -> "Settings":
        """Build settings from a dict (e.g. a saved ``settings.json``), checking field names."""
        names = {f.name for f in dataclasses.fields(cls)}
        unknown = sorted(set(d) - names)
        if unknown:
            raise FramestyleError(f"{source}: unknown setting(s) {', '.join(unknown)}")
        fixed = {k: tuple(v) if isinstance(v, list) else v for k, v in d.items()}
        return cls(**fixed)

    def differences(self, other: "Settings") -> list[str]:
        """Names of the settings whose values differ from ``other``'s."""
        a, b = self.to_dict(), other.to_dict()
        return [k for k in a if a[k] != b[k]]


def load_settings(path: Path) -> Settings:
    """Read a ``settings.json`` written by :func:`Settings.to_dict`."""
    try:
        return Settings.from_dict(json.loads(Path(path).read_text()), str(path))
    except (OSError, ValueError) as exc:
        raise FramestyleError(f"{path}: cannot read settings ({exc})")
