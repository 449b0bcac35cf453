"""The allocator setting that keeps freed activation memory (framestyle.style.allocator)."""

import subprocess
import sys

import pytest

# Twenty-one "passes", each allocating, touching and freeing 216 MiB in four tensors larger
# than glibc's largest mmap threshold (32 MiB), as a solver iteration does with its
# activations. Prints the bytes glibc served by mmap while one pass's tensors were alive
# (mallinfo2's hblkhd, man 3 mallinfo) and the minor page faults of the last twenty passes.
# A fresh process each time.
PROBE = """
import ctypes, resource, sys, torch
class MallInfo2(ctypes.Structure):
    _fields_ = [(name, ctypes.c_size_t) for name in
                "arena ordblks smblks hblks hblkhd usmblks fsmblks uordblks fordblks keepcost".split()]
libc = ctypes.CDLL(None)
libc.mallinfo2.restype = MallInfo2
if sys.argv[1] == "keep":
    from framestyle.style.allocator import keep_freed_memory
    assert keep_freed_memory()
faults = lambda: resource.getrusage(resource.RUSAGE_SELF).ru_minflt
def one_pass():
    kept = [torch.ones(mib, 256, 1024) for mib in (48, 96, 48, 24)]
    mapped = libc.mallinfo2().hblkhd
    del kept
    return mapped
mapped_before = libc.mallinfo2().hblkhd
mapped = one_pass() - mapped_before
before = faults()
for _ in range(20):
    one_pass()
print(mapped, faults() - before)
"""

MIB = 1 << 20


def _probe(mode: str) -> tuple[int, int]:
    done = subprocess.run([sys.executable, "-c", PROBE, mode], capture_output=True, text=True, check=True)
    mapped, faults = done.stdout.split()
    return int(mapped), int(faults)


@pytest.fixture(scope="module")
def plain_and_kept():
    return _probe("plain"), _probe("keep")


def test_large_blocks_come_from_the_heap_instead_of_fresh_mmaps(plain_and_kept):
    # man 3 mallopt: blocks above M_MMAP_THRESHOLD are served by mmap (counted in mallinfo2's
    # hblkhd) unless M_MMAP_MAX is 0. Deterministic: the mechanism the speed rests on.
    (plain_mapped, _), (kept_mapped, _) = plain_and_kept
    assert plain_mapped >= 216 * MIB
    assert kept_mapped == 0


def test_freed_activation_memory_is_reused_instead_of_faulted_in_again(plain_and_kept):
    # Without the setting every block is unmapped when freed and each 4 KiB page faults in
    # again: 20 × 216 MiB / 4 KiB = 1 105 920 faults. With it the heap settles after a few
    # passes (where each pass's blocks land varies from run to run); measured 30 720–122 880
    # faults in 12 runs on the 2-core development machine, so a quarter leaves room.
    (_, plain_faults), (_, kept_faults) = plain_and_kept
    assert plain_faults > 1_000_000
    assert kept_faults < plain_faults / 4
