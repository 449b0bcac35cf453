"""Limited-memory BFGS over one tensor, with every buffer allocated once.

The solver's optimiser: L-BFGS (Liu & Nocedal 1989, "On the limited memory BFGS method for
large scale optimization"), the direction from the two-loop recursion of Nocedal & Wright
2006 ("Numerical Optimization", 2nd ed., Algorithm 7.4), a unit step without line search
(the first step scaled to min(1, 1/‖g‖₁)), curvature pairs kept only when yᵀs > 1e-10. These
are the steps of ``torch.optim.LBFGS`` without line search, operation for operation, so the
iterates are the same to the bit (tests/test_lbfgs.py checks it).

Why not torch's own: it allocates each iteration's curvature pair (two image-sized vectors)
afresh and frees the oldest, between the network's much larger activations. On glibc, with
the solver's freed memory kept in the process (:mod:`framestyle.style.allocator`), those
long-lived blocks scatter over the heap and the activations stop fitting the holes they
leave: at 1280×720 a solve's peak memory grew by about 450 MiB more than its history over its
first 12 iterations. Here the history is two (m, n) tensors allocated before the first
iteration and overwritten in a ring, so every iteration allocates the same transient blocks.

Example
-------
>>> x = torch.tensor([3.0, -2.0], requires_grad=True)
>>> opt = LBFGS(x, history=5)
>>> for _ in range(20):
...     x.grad = None
...     ((x - 1.0) ** 2).sum().backward()
...     if not opt.step():
...         break
>>> torch.allclose(x.detach(), torch.ones(2))
True
"""

from __future__ import annotations

import torch


class LBFGS:
    """L-BFGS on the tensor ``x`` (updated in place).

    Parameters
    ----------
    x : the variable, any shape; its ``.grad`` must hold the gradient at ``x`` before each step
    history : m, the curvature pairs (s, y) kept
    lr : the step length of every step after the first
    """

    def __init__(self, x: torch.Tensor, history: int, lr: float = 1.0):
        n = x.numel()
        self.x, self.m, self.lr = x, history, lr
        # A ring of m + 1 slots: the last m steps s = x_{k+1} − x_k and gradient changes
        # y = g_{k+1} − g_k, and a free slot where the newest pair is made before it is kept.
        # (Each its own allocation, aligned as any tensor: a row of one big tensor may not be,
        # and a dot product's rounding can depend on the alignment.)
        self.s = [x.new_empty(n) for _ in range(history + 1)]
        self.y = [x.new_empty(n) for _ in range(history + 1)]
        self.rho: list[torch.Tensor] = [x.new_empty(())] * (history + 1)  # 1 / yᵀs per pair
        self.alpha: list[torch.Tensor] = [x.new_empty(())] * (history + 1)
        self.count, self.oldest = 0, 0  # pairs kept; ring slot of the oldest
        self.d, self.q, self.g_prev = x.new_empty(n), x.new_empty(n), x.new_empty(n)
        self.h_diag: torch.Tensor | float = 1.0  # γ = sᵀy / yᵀy, the initial inverse Hessian's scale
        self.t: torch.Tensor | float = lr
        self.steps = 0

    @torch.no_grad()
    def step(self) -> bool:
        """Move ``x`` along the L-BFGS direction from its gradient ``x.grad``.

        Returns False, leaving ``x`` unchanged, where the gradient is zero or the direction
        does not descend: the optimisation is over.
        """
        g = self.x.grad.reshape(-1)
        if not g.any():
            return False
        if self.steps == 0:
            torch.neg(g, out=self.d)
            self.t = min(1.0, 1.0 / g.abs().sum()) * self.lr
        else:
            self._remember(g)  # from the last step's d and t
            self._direction(g)
            self.t = self.lr
        self.g_prev.copy_(g)
        if g.dot(self.d) > 0:
            return False
        self.x.add_(self.d.view_as(self.x), alpha=self.t)
        self.steps += 1
        return True

    def _slot(self, i: int) -> int:
        """The ring slot of the i-th kept pair, oldest first."""
        return (self.oldest + i) % (self.m + 1)

    def _remember(self, g: torch.Tensor) -> None:
        """Keep the pair of the last step (s = t·d, y = g − g_prev) if its curvature yᵀs > 1e-10."""
        k = self._slot(self.count)
        y, s = self.y[k], self.s[k]
        torch.sub(g, self.g_prev, out=y)
        torch.mul(self.d, self.t, out=s)
        ys = y.dot(s)
        if ys > 1e-10:
            if self.count == self.m:
                self.oldest = self._slot(1)
            else:
                self.count += 1
            self.rho[k] = 1.0 / ys
            self.h_diag = ys / y.dot(y)

    def _direction(self, g: torch.Tensor) -> None:
        """d = −H g by the two-loop recursion (Nocedal & Wright 2006, Algorithm 7.4)."""
        q = torch.neg(g, out=self.q)
        for i in reversed(range(self.count)):
            k = self._slot(i)
            self.alpha[k] = self.s[k].dot(q) * self.rho[k]
            q.add_(self.y[k], alpha=-self.alpha[k])
        r = torch.mul(q, self.h_diag, out=self.d)
        for i in range(self.count):
            k = self._slot(i)
            beta = self.y[k].dot(r) * self.rho[k]
            r.add_(self.s[k], alpha=self.alpha[k] - beta)
