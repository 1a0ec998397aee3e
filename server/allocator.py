"""Keep the memory a check frees for the next array, instead of handing it back to the kernel.

A check makes thousands of short-lived numpy arrays of a few hundred kilobytes to a few megabytes. With glibc's
default settings an array above the mmap threshold is a fresh mapping of its own, and heap memory freed above the
trim threshold goes back to the kernel at once, so the next array of that size faults every page in again. On
a virtual machine those page faults were as much work as the arithmetic: the waveform metrics of a 32-receiver
bus took 9-13 ms with the defaults and 5-6 ms with the settings below (tests/bench_live.py shows the whole check).

keep_freed_memory() raises the mmap threshold to 32 MiB (larger arrays are still mapped alone and returned when
freed), stops trimming the heap, and pads each heap extension a little, so a process reuses the pages it has
touched: three checks of a sample bus in a row fault in about 9 000 pages with the defaults and about 50 so.
What a process holds then stays near its peak: a check worker's address-space limit (server.workers) already
bounds that peak, and the pad is small beside the limit.

Process settings, not engine code: the check workers and the command line call it at start; on a C library
without mallopt (not glibc) it does nothing.
"""

import ctypes
import ctypes.util
import platform

M_TRIM_THRESHOLD = -1  # glibc's mallopt parameters (malloc.h)
M_TOP_PAD = -2
M_MMAP_THRESHOLD = -3
MMAP_THRESHOLD_BYTES = 32 * 1024 * 1024  # glibc's own cap on its moving threshold, on 64-bit systems
TOP_PAD_BYTES = 16 * 1024 * 1024
TRIM_THRESHOLD_BYTES = 2**31 - 1  # the largest mallopt takes: in effect, never trim


def keep_freed_memory() -> bool:
    """Set the allocator as the module docstring says; True when the C library took every setting."""
    if platform.system() != "Linux" or platform.libc_ver()[0] != "glibc":
        return False
    name = ctypes.util.find_library("c")
    if name is None:
        return False
    libc = ctypes.CDLL(name)
    mallopt = libc.mallopt
    mallopt.argtypes = [ctypes.c_int, ctypes.c_int]
    mallopt.restype = ctypes.c_int
    settings = (
        (M_MMAP_THRESHOLD, MMAP_THRESHOLD_BYTES),
        (M_TRIM_THRESHOLD, TRIM_THRESHOLD_BYTES),
        (M_TOP_PAD, TOP_PAD_BYTES),
    )
    return all(mallopt(param, value) == 1 for param, value in settings)
