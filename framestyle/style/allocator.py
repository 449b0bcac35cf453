"""Keep the solver's freed activation memory in the process instead of handing it back.

glibc's ``malloc`` serves every block larger than its mmap threshold (at most 32 MiB on a
64-bit system) with a fresh ``mmap`` and returns it to the kernel on ``free``. A solver
iteration at HD sizes allocates and frees gigabytes of such blocks (a 32-channel activation
at 1280×720 is 118 MB), so every iteration faults the same memory in again, page by page,
each page zeroed by the kernel. Measured on a 2-core CPU, rendering three 1280×720 frames
with 4 solver iterations each: 11.6 million page faults and 7.6–7.8 s per warm-started
frame; with freed blocks kept (``M_MMAP_MAX`` 0, ``M_TRIM_THRESHOLD`` 1 GiB) 0.69 million
and 4.2–4.5 s (8 iterations: 14.4–15.1 s → 8.0 s). The price is peak memory: 2683 → 3046
MiB in that render, as freed blocks are reused where they fit rather than handed back. So
what lives across a solve's iterations is allocated once, before the first: a block made in
every iteration and kept for several (torch's L-BFGS history) scatters over the heap and the
activations stop fitting the holes (:mod:`framestyle.style.lbfgs`).

The settings are glibc's documented ``mallopt`` parameters (``man 3 mallopt``); on other C
libraries (macOS, Windows, musl) nothing is changed.
"""

from __future__ import annotations

import ctypes
import functools
import platform

M_TRIM_THRESHOLD = -1  # glibc <malloc.h>: free memory at the top of the heap kept below this
M_MMAP_MAX = -4  # glibc <malloc.h>: most blocks served by mmap at once (0: none)
TRIM_THRESHOLD = 1 << 30  # bytes of free heap top kept before any is handed back


@functools.cache
def keep_freed_memory() -> bool:
    """Tell glibc's malloc to serve large blocks from the heap and keep them when freed.

    Process-wide and idempotent. Returns whether the setting took effect (False on a C
    library other than glibc).
    """
    if platform.libc_ver()[0] != "glibc":
        return False
    libc = ctypes.CDLL(None)
    return bool(libc.mallopt(M_MMAP_MAX, 0)) and bool(libc.mallopt(M_TRIM_THRESHOLD, TRIM_THRESHOLD))
