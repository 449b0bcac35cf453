"""All render settings in one dataclass, with the defaults a user would pick.

The CLI builds a :class:`Settings`; the library consumes it. It is saved beside the output
(``settings.json``) and hashed into the manifest so a resumed render provably uses the same
settings as the one it continues.
"""

from __future__ import annotations

import dataclasses
import hashlib
import json
from dataclasses import dataclass, field
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
    colour: str = "style"  # palette: "style" (painting's), "luma" (footage's), "match" (recoloured style)
    luma_standard: str = "bt709"  # luma weights for "luma": ITU-R "bt709" (HD) or "bt601" (SD)
    strength: float = 1.0  # 0 = the footage, 1 = full style (a linear mix)
    matte: str | None = None  # folder of matte frames (white = stylise), or "alpha" for the input's
    matte_softness: float = 2.0  # soft matte edge: Gaussian sigma in source pixels
    scales: int = 1  # coarse-to-fine: solve at 1/2**(scales-1) of the size first, then refine
    shot_looks: dict = field(default_factory=dict)  # per-shot overrides: {"2": {"strength": 0.5}}
    # --- network and solver -----------------------------------------------------------------
    network: str = "efficientnet-lite0"  # perceptual network (see framestyle.network.NETWORKS)
    weights: str | None = None  # a state_dict file instead of the network's default weights
    style_layers: tuple[str, ...] = ()  # empty: the network's default style layers
    content_layer: str = ""  # empty: the network's default content layer
    width: int = 480  # working width in pixels (never above the source width)
    iterations: int = 300  # most L-BFGS iterations for one frame
    tolerance: float = 0.01  # stop when the loss falls by less than this fraction in 10 iterations
    #                          (half of it for a shot's first frame, which anchors the shot)
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

    def for_shot(self, shot: int) -> "Settings":
        """The settings of one shot: these, with that shot's overrides from ``shot_looks``."""
        overrides = {k: tuple(v) if isinstance(v, list) else v
                     for k, v in self.shot_looks.get(str(shot), {}).items()}
        return dataclasses.replace(self, **overrides, shot_looks={})

    def check(self, source: str = "settings") -> None:
        """Raise :class:`FramestyleError` for values no render can use."""
        from .compose import COLOURS

        problems = []
        if self.colour not in COLOURS:
            problems.append(f"colour {self.colour!r} is not one of {', '.join(COLOURS)}")
        from .flow import FLOW_PRESETS

        if self.flow_preset not in FLOW_PRESETS:
            problems.append(f"flow_preset {self.flow_preset!r} is not one of {', '.join(FLOW_PRESETS)}")
        if self.luma_standard not in ("bt601", "bt709"):
            problems.append(f"luma_standard {self.luma_standard!r} is not bt601 or bt709")
        if not 0.0 <= self.strength <= 1.0:
            problems.append(f"strength {self.strength} is outside 0..1")
        if self.scales < 1 or self.iterations < 1 or self.width < 1:
            problems.append("scales, iterations and width must be at least 1")
        if self.style_scale <= 0 or self.matte_softness < 0:
            problems.append("style_scale must be positive and matte_softness not negative")
        if 1 not in self.long_term or min(self.long_term) < 1:
            problems.append("long_term needs frame offsets of 1 or more, including 1")
        if self.style_mix and (len(self.style_mix) != len(self.styles) or min(self.style_mix) < 0
                               or sum(self.style_mix) <= 0):
            problems.append(f"style_mix needs {len(self.styles)} non-negative weights, not all 0")
        names = {f.name for f in dataclasses.fields(self)} - {"shot_looks"}
        for shot, overrides in self.shot_looks.items():
            unknown = sorted(set(overrides) - names)
            if not str(shot).isdigit() or unknown:
                problems.append(f"shot {shot}: not a shot number or unknown setting(s) {unknown}")
        if problems:
            raise FramestyleError(f"{source}: {'; '.join(problems)}")
        for shot in self.shot_looks:
            self.for_shot(int(shot)).check(f"{source}, shot {shot}")

    def differences(self, other: "Settings") -> list[str]:
        """Names of the settings whose values differ from ``other``'s."""
        a, b = self.to_dict(), other.to_dict()
        return [k for k in a if a[k] != b[k]]


_PATH_SETTINGS = ("styles", "weights", "matte")  # resolved against the look file's folder


def load_look(path: Path) -> dict:
    """Read a look file (TOML) into a dict of settings, ready to merge with CLI options.

    Top-level keys are :class:`Settings` fields; a ``[shots.N]`` table overrides settings
    for shot N. Relative style, weights and matte paths are taken from the look file's
    folder, so a look travels with its images. Example::

        styles = ["paint.png"]
        style_weight = 8.0
        colour = "luma"

        [shots.2]
        styles = ["ink.png"]
        strength = 0.6
    """
    import tomllib

    path = Path(path)
    try:
        data = tomllib.loads(path.read_text())
    except (OSError, UnicodeDecodeError, tomllib.TOMLDecodeError) as exc:
        raise FramestyleError(f"{path}: not a readable look file ({exc})")
    shots = data.pop("shots", {})
    if not isinstance(shots, dict):
        raise FramestyleError(f"{path}: [shots] must be a table of shot numbers")
    look = _resolve_paths(data, path.parent)
    look["shot_looks"] = {str(k): _resolve_paths(v, path.parent) for k, v in shots.items()}
    Settings.from_dict(look, str(path)).check(str(path))
    return look


def _resolve_paths(table: dict, folder: Path) -> dict:
    out = dict(table)
    for key in _PATH_SETTINGS:
        value = out.get(key)
        if key == "styles" and isinstance(value, list):
            out[key] = [str((folder / v).resolve()) for v in value]
        elif isinstance(value, str) and value != "alpha":
            out[key] = str((folder / value).resolve())
    return out
