"""How the C library's allocator keeps or returns large freed blocks (Linux, glibc).

Two commands want opposite things. ``run`` returns large freed blocks at once after its
simulation, so the summary of a big study does not peak higher by an amount that varies from
run to run (:func:`return_large_blocks`). ``tune`` simulates the same small sample chunks over
and over, each call allocating and freeing megabytes of scratch: there the blocks are better
kept for the next call (:func:`keep_large_blocks`), since fresh pages from the system fault in
and are zeroed one by one. Both leave the allocator alone where the user set it through the
environment and on other systems.
"""

from __future__ import annotations

import os
import sys

__all__ = ["return_large_blocks", "keep_large_blocks"]

#: mallopt parameter numbers (glibc's malloc.h).
_M_TRIM_THRESHOLD, _M_MMAP_THRESHOLD = -1, -3

#: The largest mmap threshold glibc accepts on 64-bit systems (half its 64 MiB arena heap).
_LARGEST_MMAP_THRESHOLD = 32 * 1024 * 1024


def _libc():
    """The C library when it is glibc on Linux and the user did not tune it, else None."""
    if sys.platform != "linux" or any(
            name in os.environ for name in ("MALLOC_MMAP_THRESHOLD_", "MALLOC_TRIM_THRESHOLD_")):
        return None
    try:
        import ctypes

        libc = ctypes.CDLL("libc.so.6")
        libc.mallopt  # noqa: B018 - glibc has it; another C library may not
        return libc
    except (OSError, AttributeError):
        return None


def return_large_blocks() -> None:
    """Large freed blocks go back to the system from here on.

    glibc's malloc raises its mmap threshold each time a large block is freed, so later blocks
    of that size come from arenas that keep the memory after use, one arena per thread: the
    summary of a 10^6-plant study (whole columns, in two threads) peaked 40 to 80 MB higher,
    by an amount that varied from run to run. A threshold set once (glibc's default, 128 KiB)
    stays fixed, and what the arenas keep free goes back at once. Set only after the
    simulation, which allocates and frees its chunk arrays often and ran about 5 % slower with
    it.
    """
    libc = _libc()
    if libc is not None:
        libc.mallopt(_M_MMAP_THRESHOLD, 128 * 1024)
        libc.malloc_trim(0)  # and what the arenas already keep free goes back too


def keep_large_blocks() -> None:
    """Blocks up to 32 MiB come from the allocator's arenas and freed memory stays there for
    the next allocation (``tune`` on the pasteuriser, two cores: the search 10.6-11.3 ->
    8.0-8.2 s, 3.0 M -> 0.22 M minor page faults, peak 759 -> 778 MB)."""
    libc = _libc()
    if libc is not None:
        libc.mallopt(_M_MMAP_THRESHOLD, _LARGEST_MMAP_THRESHOLD)
        libc.mallopt(_M_TRIM_THRESHOLD, 2**31 - 1)  # an int: the largest it takes
