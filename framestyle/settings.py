"""All render settings in one typed dataclass, with the defaults a user would pick.

The CLI builds a :class:`Settings`; the library consumes it. It is saved in the output
folder's manifest so a resumed render provably uses the same settings as the one it
continues. Every value is checked on construction (pydantic, strict types): a string where a
list is meant, an unknown key or an out-of-range value is refused with one line naming the
key and what is expected, never iterated character by character.
"""

from __future__ import annotations

import dataclasses
import hashlib
import json
import tomllib
from pathlib import Path
from typing import Annotated, Any, Literal

from pydantic import ConfigDict, Field, Strict, ValidationError
from pydantic.dataclasses import dataclass

from framestyle.errors import FramestyleError
from framestyle.finish.compose import COLOURS
from framestyle.motion import FLOW_PRESETS, WARP_FILTERS
from framestyle.timecode import MAX_FPS

NETWORKS = ("efficientnet-lite0", "vgg19")
"""Perceptual networks (see :mod:`framestyle.style.network`)."""
DEVICES = ("auto", "cpu", "cuda", "mps")
"""Where the network runs; "auto" is a GPU torch sees (CUDA, then Apple's MPS), else the CPU."""
PRECISIONS = ("float32", "bfloat16")
"""The network's arithmetic; bfloat16 runs it under autocast, Gram matrices and losses stay float32."""

MAX_STROKE_SIZE = 100
"""The largest stroke size (the style image at 100 × the working size)."""

CLIP_WIDE = ("network", "network_weights", "device", "shot_detection", "cut_threshold", "gradual_threshold", "fps",
             "start_timecode", "prores")
"""Settings of the whole clip: its network, how its shots are found, its timecode and hand-off;
a look's ``[shots.N]`` table cannot set them."""

_NonNegative = Annotated[float, Field(ge=0, allow_inf_nan=False)]
_Weight = Annotated[float, Field(ge=0, le=1e6, allow_inf_nan=False)]  # bounded: a weight past a million
#                                 times another drowns it, and far beyond that the float32 loss overflows
_Fraction = Annotated[float, Field(gt=0, le=1, allow_inf_nan=False)]
_List = Strict(False)  # a TOML/JSON list is accepted for a tuple; its items stay strictly typed


@dataclass(frozen=True, config=ConfigDict(strict=True, extra="forbid"))
class Settings:
    # --- look -------------------------------------------------------------------------------
    styles: Annotated[tuple[str, ...], _List] = ()  # style image paths, mixed at the Gram level
    style_mix: Annotated[tuple[_Weight, ...], _List] = ()  # one weight per style (empty: equal)
    style_weight: _Weight = 5.0  # weight of the relative Gram style loss
    content_weight: _Weight = 1.0  # weight of the relative content loss
    tv_weight: _Weight = 10.0  # total-variation weight: suppresses pixel-level speckle
    warm_tv_weight: _Weight | None = None  # the same for frames that start from a warped
    #                                 frame (None: tv_weight); lower keeps strokes crisp along a shot
    stroke_size: Annotated[float, Field(gt=0, le=MAX_STROKE_SIZE, allow_inf_nan=False)] = 1.0  # style image resized to this × the working size
    colour: Literal[COLOURS] = "style"  # palette: the painting's, the footage's (luma), recoloured
    luma_standard: Literal["bt709", "bt601"] = "bt709"  # luma weights for "luma": HD or SD
    strength: Annotated[float, Field(ge=0, le=1, allow_inf_nan=False)] = 1.0  # 0 = the footage, 1 = full style
    matte: str | None = None  # folder of matte frames (white = stylise), or "alpha" for the input's
    matte_softness: Annotated[float, Field(ge=0, le=1000, allow_inf_nan=False)] = 2.0  # soft matte edge:
    #                                 Gaussian sigma in source pixels (1000: wider than any frame needs)
    picture_area: Literal["auto", "full"] = "auto"  # auto: black letterbox or pillarbox bars found in
    #                                 a shot are delivered as they are, the picture inside them stylised
    keep_fades: bool = True  # a fade in from black or white, or out to it, at a shot's ends fades the
    #                                 render too (shots.fades); false: faded frames are stylised as they are
    levels: Annotated[int, Field(ge=1, le=6)] | None = None  # coarse-to-fine levels: first solve at
    #                                 1/2**(levels-1); None: by the working size's longer side (style.solver.coarse_levels)
    warm_levels: Annotated[int, Field(ge=1, le=6)] = 1  # the same for frames that start from the previous one
    image_scales: Annotated[int, Field(ge=1, le=6)] = 3  # scales a frame solved on its own is optimised
    #                                 over at each level (Mordvintsev et al. 2018); 1: its pixels
    shot_looks: dict[str, dict[str, Any]] = dataclasses.field(default_factory=dict)  # {"2": {"strength": 0.5}}
    # --- network and solver -----------------------------------------------------------------
    network: Literal[NETWORKS] = "efficientnet-lite0"  # perceptual network
    feature_blur: Literal[3, 5] = 3  # EfficientNet-Lite0's low-pass filter before each subsampling
    #                                 (BlurPool, Zhang 2019): 5 is steadier along a shot
    network_weights: str | None = None  # a state_dict file instead of the network's default weights
    style_layers: Annotated[tuple[str, ...], _List] = ()  # empty: the network's default style layers
    content_layer: str = ""  # empty: the network's default content layer
    width: Annotated[int, Field(ge=1)] | None = None  # working width in pixels (never above the source
    #                                 width); None: the longer side 480, or 1280 for sources longer than 1280 (working.py)
    iterations: Annotated[int, Field(ge=1)] = 300  # most L-BFGS iterations for one frame
    warm_iterations: Annotated[int, Field(ge=1)] | None = None  # the same for a frame started from its
    #                                 warped predecessor (None: iterations)
    tolerance: _NonNegative = 0.01  # stop when the loss falls by less than this fraction in 10
    #                                 iterations (half of it for a shot's first frame)
    seed: Annotated[int, Field(ge=0)] = 0  # seeds the noise added where a frame starts from its content
    device: Literal[DEVICES] = "auto"  # where the network runs (strokes may land differently from the CPU's)
    precision: Literal[PRECISIONS] = "float32"  # the network's arithmetic (bfloat16: autocast)
    # --- temporal stability (Ruder et al. 2016) -----------------------------------------------
    temporal: bool = True  # warm start from the warped previous frame + temporal losses
    temporal_weight: _Weight = 50.0  # weight of the (short- and long-term) temporal loss
    long_term: Annotated[tuple[Annotated[int, Field(ge=1)], ...], _List] = (1, 10, 20, 40)  # frames back tied
    flow_preset: Literal[FLOW_PRESETS] = "medium"  # DIS optical flow preset
    warp_filter: Literal[WARP_FILTERS] = "cubic"  # resampling of the warped frames: linear, cubic, lanczos
    detail_probe: Annotated[int, Field(ge=0)] = 10  # every N frames of a chain one is also solved on
    #                                 its own; warm frames' TV weight is steered to keep its stroke detail (0: off)
    passes: Annotated[int, Field(ge=1, le=32)] = 1  # 1: one forward pass; more: then backward, forward ... in turn
    pass_iterations: Annotated[int, Field(ge=1)] = 50  # most solver iterations per frame in each later pass
    # --- shots ------------------------------------------------------------------------------
    shot_detection: bool = True  # restart the temporal chain at detected cuts
    cut_threshold: _Fraction = 0.015  # least colour+layout step (0..1] of a cut; it must also stand out
    gradual_threshold: _Fraction = 0.2  # least end-to-end distance of a fade or dissolve
    # --- delivery -----------------------------------------------------------------------------
    fps: Annotated[float, Field(gt=0, le=MAX_FPS, allow_inf_nan=False)] | None = None  # frame rate of a frame folder (default 24); labels timecode
    start_timecode: str | None = None  # the first frame's timecode (default: a video's own, else 00:00:00:00)
    prores: bool = False  # also write an edit-ready Apple ProRes 422 HQ .mov with the source's audio

    def __post_init__(self) -> None:
        if 1 not in self.long_term:
            raise ValueError("long_term: must include 1 (the previous frame)")
        if self.style_mix and len(self.style_mix) != len(self.styles):
            count = len(self.styles)
            raise ValueError(f"style_mix: needs {count} weight{'s' if count != 1 else ''}, one per style, "
                             f"not {len(self.style_mix)}")
        if self.style_mix and sum(self.style_mix) <= 0:
            raise ValueError("style_mix: the weights are all 0")
        if self.matte == "":
            raise ValueError("matte: give a folder of matte frames or 'alpha'")
        names = {f.name for f in dataclasses.fields(self)} - {"shot_looks"}
        for shot, overrides in self.shot_looks.items():
            unknown = sorted(set(overrides) - names)
            whole = [key for key in CLIP_WIDE if key in overrides]
            if not shot.isdigit() or int(shot) < 1:
                raise ValueError(f"[shots.{shot}]: not a shot number (1, 2, ...)")
            if shot != str(int(shot)):
                raise ValueError(f"[shots.{shot}]: write the shot number as {int(shot)}")
            if unknown:
                raise ValueError(f"[shots.{shot}]: unknown setting(s) {', '.join(unknown)}")
            if whole:
                raise ValueError(f"[shots.{shot}]: {', '.join(whole)} appl{'ies' if len(whole) == 1 else 'y'} to the "
                                 f"whole clip, not to one shot")

    @classmethod
    def from_dict(cls, values: dict, source: str = "settings") -> "Settings":
        """Build settings from a dict (a look file, a saved manifest, CLI options); every shot's
        overrides are checked too. Raises :class:`FramestyleError` naming ``source`` and the key."""
        settings = _validated(cls, values, source)
        for shot in settings.shot_looks:
            settings.for_shot(int(shot), source)
        return settings

    def to_dict(self) -> dict:
        """Plain JSON-able dict of every field (tuples as lists)."""
        return json.loads(json.dumps(dataclasses.asdict(self)))

    def digest(self) -> str:
        """A short hash of the settings; a resumed render must match it exactly."""
        return hashlib.sha256(json.dumps(self.to_dict(), sort_keys=True).encode()).hexdigest()[:16]

    def looks(self) -> list[tuple[int | None, "Settings"]]:
        """(None, these settings), then (N, shot N's settings) for each shot with a look of its own."""
        return [(None, self)] + [(int(n), self.for_shot(int(n))) for n in self.shot_looks]

    def for_shot(self, shot: int, source: str = "settings") -> "Settings":
        """The settings of one shot: these, with that shot's overrides from ``shot_looks``."""
        overrides = self.shot_looks.get(str(shot), {})
        if not overrides:
            return dataclasses.replace(self, shot_looks={})
        return _validated(type(self), {**overlay(self.to_dict(), overrides), "shot_looks": {}},
                          f"{source} [shots.{shot}]")

    def differences(self, other: "Settings") -> list[str]:
        """Names of the settings whose values differ from ``other``'s; a shot's own look as
        ``[shots.N] name``, one per setting that differs."""
        a, b = self.to_dict(), other.to_dict()
        names = [k for k in a if a[k] != b[k] and k != "shot_looks"]
        mine, theirs = a["shot_looks"], b["shot_looks"]
        for shot in sorted({*mine, *theirs}, key=int):
            ours, others = mine.get(shot, {}), theirs.get(shot, {})
            names += [f"[shots.{shot}] {k}" for k in sorted({*ours, *others}) if ours.get(k) != others.get(k)]
        return names


def overlay(base: dict, over: dict) -> dict:
    """Settings ``base`` with ``over``'s values in their place; a list of styles given without
    its own ``style_mix`` mixes them equally (the weights left over were for other styles)."""
    merged = {**base, **over}
    if "styles" in over and "style_mix" not in over:
        merged.pop("style_mix", None)
    return merged


def _validated(cls: type, values: dict, source: str):
    try:
        return cls(**values)
    except ValidationError as exc:
        raise FramestyleError(f"{source}: {'; '.join(_describe(e) for e in exc.errors())}") from None


_EXPECTED = {  # pydantic's error types, said in a look-file writer's words
    "tuple_type": "expected a list, like [\"a.png\", \"b.png\"]", "float_type": "expected a number",
    "int_type": "expected a whole number", "string_type": "expected text in quotes",
    "bool_type": "expected true or false", "dict_type": "expected a table",
    "unexpected_keyword_argument": "unknown setting",
}


def _describe(error: dict) -> str:
    """One pydantic error as ``key: what is expected (got value)``."""
    where = ".".join(str(part) for part in error["loc"])
    if error["type"] == "value_error":
        return str(error["ctx"]["error"])
    what = _EXPECTED.get(error["type"], error["msg"].replace("Input should be", "expected"))
    got = "" if error["type"] == "unexpected_keyword_argument" else f" (got {error['input']!r})"
    return f"{where}: {what}{got}"


_PATH_SETTINGS = ("styles", "network_weights", "matte")  # resolved against the look file's folder


def load_look(path: Path) -> dict:
    """Read a look file (TOML) into a dict of settings, ready to merge with CLI options.

    Top-level keys are :class:`Settings` fields; a ``[shots.N]`` table overrides settings
    for shot N. Relative style, network-weight and matte paths are taken from the look
    file's folder, so a look travels with its images. Example::

        styles = ["paint.png"]
        style_weight = 8.0
        colour = "luma"

        [shots.2]
        styles = ["ink.png"]
        strength = 0.6

    Raises :class:`FramestyleError` with one line naming the file, the key and what is
    expected for a malformed file, a wrong type, an unknown key or an out-of-range value.
    """
    path = Path(path)
    try:
        data = tomllib.loads(path.read_text(encoding="utf-8-sig"))  # a byte-order mark, as some editors save
    except (OSError, UnicodeDecodeError, tomllib.TOMLDecodeError) as exc:
        raise FramestyleError(f"{path}: not a readable look file ({exc})")
    if "shot_looks" in data:  # the settings' own name for the [shots.N] tables
        raise FramestyleError(f"{path}: shot_looks: unknown setting; give a shot its look in a [shots.N] table")
    shots = data.pop("shots", {})
    if not isinstance(shots, dict) or not all(isinstance(v, dict) for v in shots.values()):
        raise FramestyleError(f"{path}: shots: expected tables like [shots.2]")
    look = _resolve_paths(data, path.parent)
    look["shot_looks"] = {str(k): _resolve_paths(v, path.parent) for k, v in shots.items()}
    Settings.from_dict(look, str(path))
    return look


def _resolve_paths(table: dict, folder: Path) -> dict:
    out = dict(table)
    for key in _PATH_SETTINGS:
        value = out.get(key)
        if key == "styles":
            if isinstance(value, list):  # anything else is left for the type check to name
                out[key] = [str((folder / v).resolve()) if isinstance(v, str) else v for v in value]
        elif isinstance(value, str) and value != "alpha":
            out[key] = str((folder / value).resolve())
    return out
