"""The solver's L-BFGS: torch's L-BFGS step for step, with its history in fixed buffers."""

import pytest
import torch

from framestyle.style.lbfgs import LBFGS

N = 60


def _bowl(x):
    """Convex: a random positive-definite quadratic, a quartic and a softplus."""
    g = torch.Generator().manual_seed(1)
    a = torch.randn(N, N, generator=g)
    a = a @ a.T / N + 0.1 * torch.eye(N)
    b = torch.randn(N, generator=g)
    return 0.5 * x @ a @ x - b @ x + 0.01 * (x**4).sum() + torch.nn.functional.softplus(x).sum()


def _wells(x):
    """Not convex: a double well per coordinate; the first steps, near the top, meet negative
    curvature, so their pairs (yᵀs ≤ 1e-10) are not kept."""
    return 0.01 * (x**4).sum() - (x**2).sum()


def _gradient(f, x):
    x.grad = None
    f(x).backward()


@pytest.mark.parametrize("f", [_bowl, _wells])
@pytest.mark.parametrize("history", [3, 10])
def test_every_iterate_is_torchs_lbfgs_to_the_bit(f, history):
    # Reference: torch.optim.LBFGS without line search (a general-purpose library), which
    # implements Nocedal & Wright 2006, Algorithm 7.4; ours must give the same iterates exactly,
    # so renders do not change with the optimiser's memory layout.
    x0 = torch.randn(N, generator=torch.Generator().manual_seed(0)) * 0.1
    theirs = x0.clone().requires_grad_(True)
    reference = torch.optim.LBFGS([theirs], lr=1.0, max_iter=1, history_size=history,
                                  tolerance_grad=0.0, tolerance_change=0.0)
    ours = x0.clone().requires_grad_(True)
    opt = LBFGS(ours, history)

    def closure():
        reference.zero_grad()
        loss = f(theirs)
        loss.backward()
        return loss

    rejected = 0
    for step in range(40):
        reference.step(closure)
        _gradient(f, ours)
        kept = opt.count
        moved = opt.step()  # False at a zero gradient, where torch's step does not move either
        rejected += step >= 1 and opt.count == kept and kept < history
        assert torch.equal(ours.detach(), theirs.detach()), f"iterate {step + 1} differs"
        if not moved:
            break
    assert f(ours) < f(x0)
    if f is _wells:
        assert rejected > 0  # the pair-rejection branch was taken, and the iterates still match


def test_the_history_stays_in_the_buffers_made_at_the_start():
    # The point of the module: no image-sized block is allocated per iteration.
    x = torch.randn(N, generator=torch.Generator().manual_seed(2)).requires_grad_(True)
    opt = LBFGS(x, history=4)
    buffers = [t.data_ptr() for t in (*opt.s, *opt.y, opt.d, opt.q, opt.g_prev)]
    for _ in range(30):
        _gradient(_bowl, x)
        assert opt.step()
    assert opt.count == 4  # a full ring: the oldest pairs were overwritten
    assert [t.data_ptr() for t in (*opt.s, *opt.y, opt.d, opt.q, opt.g_prev)] == buffers


def test_a_zero_gradient_ends_the_optimisation_without_a_move():
    x = torch.ones(5, requires_grad=True)
    opt = LBFGS(x, history=3)
    x.grad = torch.zeros(5)
    assert not opt.step()
    assert torch.equal(x.detach(), torch.ones(5))
