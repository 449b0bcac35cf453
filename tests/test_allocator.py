"""The allocator setting that keeps freed activation memory (framestyle.style.allocator)."""

import subprocess
import sys

# Five "passes", each allocating, touching and freeing 216 MiB in four tensors larger than
# glibc's largest mmap threshold (32 MiB), as a solver iteration does with its activations;
# prints the minor page faults of the five. A fresh process each time.
PROBE = """
import resource, sys, torch
if sys.argv[1] == "keep":
    from framestyle.style.allocator import keep_freed_memory
    assert keep_freed_memory()
faults = lambda: resource.getrusage(resource.RUSAGE_SELF).ru_minflt
def one_pass():
    kept = [torch.ones(mib, 256, 1024) for mib in (48, 96, 48, 24)]
    del kept
one_pass()
before = faults()
for _ in range(5):
    one_pass()
print(faults() - before)
"""


def _faults(mode: str) -> int:
    done = subprocess.run([sys.executable, "-c", PROBE, mode], capture_output=True, text=True, check=True)
    return int(done.stdout.strip())


def test_freed_activation_memory_is_reused_instead_of_faulted_in_again():
    # Without the setting every block is mmapped afresh and each 4 KiB page faults in again:
    # 5 × 216 MiB / 4 KiB = 276 480 faults (man 3 mallopt: blocks above M_MMAP_THRESHOLD are
    # served by mmap and unmapped when freed). With it most of the memory is reused.
    plain, kept = _faults("plain"), _faults("keep")
    assert plain > 250_000
    assert kept < plain / 4
