"""The perceptual networks: the embedded EfficientNet-Lite0 is really ImageNet-trained, and
VGG19 never reaches for the network."""

import numpy as np
import pytest
import torch
import torch.nn.functional as F
from skimage import data

from framestyle.errors import FramestyleError
from framestyle.style.network import EfficientNetLite0, lite0_weights_file, remap_lite0_keys, load_network


@pytest.fixture(scope="module")
def plain_net():
    return EfficientNetLite0(blur=0)


def _imagenet_input(image: np.ndarray) -> torch.Tensor:
    x = torch.from_numpy(image).permute(2, 0, 1)[None].float() / 255.0
    return F.interpolate(x, size=(224, 224), mode="bilinear", antialias=True)


def test_embedded_weights_fill_every_parameter_of_the_architecture(plain_net):
    shipped = remap_lite0_keys(torch.load(lite0_weights_file(), map_location="cpu", weights_only=True))
    # load_state_dict is strict by default; check the key sets too, so nothing is left random.
    assert set(shipped) == set(plain_net.state_dict())


def test_classifies_scikit_image_cat_as_a_cat(plain_net):
    # Source: scikit-image sample data `chelsea` (a tabby cat); ImageNet class indices
    # 281-285 are the domestic cat classes (tabby, tiger cat, Persian, Siamese, Egyptian cat).
    with torch.no_grad():
        top = int(plain_net.classify(_imagenet_input(data.chelsea())).argmax())
    assert 281 <= top <= 285


def test_classifies_scikit_image_coffee_as_espresso(plain_net):
    # Source: scikit-image sample data `coffee`; ImageNet class 967 is "espresso".
    with torch.no_grad():
        top = int(plain_net.classify(_imagenet_input(data.coffee())).argmax())
    assert top == 967


def test_feature_layers_have_the_documented_shapes():
    net = load_network("efficientnet-lite0")
    feats = net(torch.rand(1, 3, 96, 128), list(net.style_layers))
    shapes = {k: tuple(v.shape) for k, v in feats.items()}
    assert shapes == {
        "stem": (1, 32, 48, 64),
        "blocks.1.expand": (1, 96, 48, 64),
        "blocks.3.expand": (1, 144, 24, 32),
        "blocks.5.expand": (1, 240, 12, 16),
        "blocks.8.expand": (1, 480, 6, 8),
    }


def test_blurpool_features_move_less_under_a_one_pixel_shift_and_less_with_the_wider_filter(plain_net):
    # Zhang 2019: low-pass filtering before subsampling makes features more shift-invariant,
    # the 5-tap binomial filter ("Bin-5") more so than the 3-tap one ("Bin-3").
    blur_net, blur5_net = load_network("efficientnet-lite0"), load_network("efficientnet-lite0", blur=5)
    img = _imagenet_input(data.astronaut())[..., :160, :160]
    shifted = torch.roll(img, shifts=1, dims=-1)

    def change(net):
        a, b = (net(x, ["blocks.5.expand"])["blocks.5.expand"][..., 2:-2, 2:-2] for x in (img, shifted))
        return float((a - b).norm() / a.norm())

    with torch.no_grad():
        assert change(blur5_net) < change(blur_net) < change(plain_net)
    k = blur5_net.stem.down.kernel[0, 0]  # Zhang 2019's Bin-5: [1, 4, 6, 4, 1] / 16 in each direction
    torch.testing.assert_close(k, torch.outer(*[torch.tensor([1.0, 4, 6, 4, 1]) / 16] * 2), rtol=0, atol=0)
    with pytest.raises(FramestyleError, match="efficientnet-lite0 only"):
        load_network("vgg19", blur=5)


def test_unknown_layer_and_network_are_user_errors():
    net = load_network("efficientnet-lite0")
    with pytest.raises(FramestyleError, match="unknown layer"):
        net(torch.rand(1, 3, 64, 64), ["conv9_9"])
    with pytest.raises(FramestyleError, match="unknown network 'resnet'"):
        load_network("resnet")


def test_vgg19_without_cached_weights_fails_with_a_clear_message(tmp_path, monkeypatch):
    monkeypatch.setattr(torch.hub, "get_dir", lambda: str(tmp_path))
    with pytest.raises(FramestyleError, match="VGG19 ImageNet weights not found") as raised:
        load_network("vgg19")
    assert "--network-weights" in str(raised.value)  # the option's name on the command line


def test_vgg19_loads_a_weights_file_and_gives_gatys_layers(tmp_path):
    from torchvision.models import vgg19

    path = tmp_path / "vgg19.pth"
    features = vgg19().features  # random weights: this checks the loading code, not ImageNet
    torch.save({f"features.{k}": v for k, v in features.state_dict().items()}, path)
    net = load_network("vgg19", path)
    feats = net(torch.rand(1, 3, 64, 64), [*net.style_layers, net.content_layer])
    assert tuple(feats["conv4_2"].shape) == (1, 512, 8, 8)  # Gatys et al. 2016: 1/8 resolution
    assert tuple(feats["conv1_1"].shape) == (1, 64, 64, 64)


def test_a_file_that_is_not_weights_is_a_user_error_naming_it(tmp_path):
    # a farm sweep: torch's own message for such a file advised loading it with weights_only=False,
    # which would run whatever code the file holds; another network's keys went without the file
    bad = tmp_path / "weights.pth"
    bad.write_bytes(b"not a checkpoint")
    with pytest.raises(FramestyleError, match=r"weights.pth: not a PyTorch weights file") as raised:
        load_network("efficientnet-lite0", bad)
    assert "weights_only" not in str(raised.value)
    other = tmp_path / "other.pth"
    torch.save({"a": torch.zeros(2)}, other)
    with pytest.raises(FramestyleError, match=r"other.pth: not EfficientNet-Lite0 weights \(unexpected key a\)"):
        load_network("efficientnet-lite0", other)


def test_folded_batch_norm_gives_the_convolution_then_batch_norm_of_the_checkpoint():
    # Reference: torch's own Conv2d followed by BatchNorm2d in eval mode (running statistics),
    # which is what the checkpoint's layer computes before folding.
    net = load_network("efficientnet-lite0")
    x = torch.rand(1, 32, 40, 56)
    layer = net.blocks[0].depthwise  # 32 channels, 3×3 depthwise, ReLU6, stride 1
    with torch.no_grad():
        expected = F.relu6(layer.bn(layer.conv(F.pad(x, (1, 1, 1, 1)))))
        torch.testing.assert_close(layer(x), expected, rtol=1e-5, atol=1e-5)


@pytest.mark.parametrize("stride, groups, kernel, cin", [(2, 32, 3, 32), (1, 32, 5, 32), (1, 1, 1, 32), (1, 1, 3, 3),
                                                         (1, 1, 5, 2), (2, 1, 3, 3)])
def test_frozen_convolution_gradient_equals_autograds(stride, groups, kernel, cin):
    # Reference: autograd's gradient of F.conv2d with respect to its input. Few input
    # channels at stride 1 (the stem's RGB) take the shifted-taps path.
    from framestyle.style.network import _conv

    weight = torch.rand(32, cin // groups, kernel, kernel)
    x = torch.rand(1, cin, 23, 31, requires_grad=True)
    grad = torch.rand_like(F.conv2d(x, weight, stride=stride, padding=kernel // 2, groups=groups))
    (expected,) = torch.autograd.grad(F.conv2d(x, weight, stride=stride, padding=kernel // 2, groups=groups), x, grad)
    (got,) = torch.autograd.grad(_conv(x, weight, stride=stride, padding=kernel // 2, groups=groups), x, grad)
    torch.testing.assert_close(got, expected)


@pytest.mark.parametrize("p, h, w", [(1, 23, 31), (2, 23, 31), (2, 2, 5), (1, 1, 4)])
def test_blurpool_padding_gives_autograds_gradient_and_keeps_nothing_of_its_input(p, h, w):
    # Reference: autograd's gradient of torch's own F.pad(mode="replicate") (up to the order
    # of the sums), down to a single row.
    from framestyle.style.network import _ReplicatePad

    x = torch.rand(1, 32, h, w, requires_grad=True)
    grad = torch.rand(1, 32, h + 2 * p, w + 2 * p)
    (expected,) = torch.autograd.grad(F.pad(x, (p,) * 4, mode="replicate"), x, grad)
    kept = []  # what the backward pass keeps (torch's own pad keeps x)
    with torch.autograd.graph.saved_tensors_hooks(lambda t: kept.append(t) or t, lambda t: t):
        padded = _ReplicatePad.apply(x, p)
    assert torch.equal(padded, F.pad(x, (p,) * 4, mode="replicate")) and kept == []
    (got,) = torch.autograd.grad(padded, x, grad)
    torch.testing.assert_close(got, expected)


def test_relu6_gives_autograds_gradient_from_its_output_at_the_edges_too():
    # Reference: autograd's gradient of torch's own F.relu6, bit for bit, with inputs exactly
    # at the clamp's edges (0 and 6, where the gradient is 0) and on both sides of them.
    from framestyle.style.network import _ReLU6

    x = torch.tensor([-1.0, -0.0, 0.0, 1e-7, 3.0, 6.0 - 1e-6, 6.0, 7.0]).repeat(4, 1).requires_grad_(True)
    grad = torch.rand_like(x)
    (expected,) = torch.autograd.grad(F.relu6(x), x, grad)
    kept = []
    with torch.autograd.graph.saved_tensors_hooks(lambda t: kept.append(t) or t, lambda t: t):
        y = _ReLU6.apply(x)
    assert torch.equal(y, F.relu6(x)) and len(kept) == 1 and kept[0].data_ptr() == y.data_ptr()
    (got,) = torch.autograd.grad(y, x, grad)
    assert torch.equal(got, expected)
    assert torch.equal(expected[0], torch.tensor([0, 0, 0, 1, 1, 1, 0, 0.0]) * grad[0])
