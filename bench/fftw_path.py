"""A pyFFTW version of the single-FFT engine (``engine="fft"``) of
lagged_sum, with a per-thread plan cache and a user wisdom cache file.

NOT USED BY THE LIBRARY. Measured on the project's machine (2-core Zen 3,
one thread, minima of repeated interleaved runs on a shared machine; see
bench/test_bench_fftw.py to measure again), this path was not faster than
the C FFT engine at any size from N = 2^12 to 2^21 samples, even with
FFTW_MEASURE plans from wisdom: about equal at N = 2^18..2^19, slower
below (Python overhead) and at 2^20..2^21 (1.2-1.3x). FFTW_ESTIMATE plans
were 1.2-2.6x slower than the C FFT. So lagged_sum(engine="fft") keeps the
C path, and this module is kept only so that the measurement can be
repeated (and the path switched on by setting the crossovers below and
calling :func:`use_fftw` / :func:`lagged_sum_fft` from _core.lagged_sum)
if another machine or FFTW build turns out faster.

What it does: one FFT convolution of the whole record, as csrc/lagsum.c's
fft engine does (transform size P = the power of two >= n + min(K, n) - 1,
P >= 2; kernel spectrum scaled by 1/P; one forward transform per signal, a
product, one inverse), with FFTW plans through pyFFTW. Accuracy is the
same as the C engine's: normwise only. Two kinds of plan:

* *tuned* plans, from FFTW wisdom built once by :func:`build_plans`
  (FFTW_MEASURE or FFTW_PATIENT) and stored in the user cache file;
  planned with FFTW_WISDOM_ONLY, so they cost nothing to make;
* *quick* plans (FFTW_ESTIMATE), for sizes the wisdom does not cover.

Either way no measuring planner runs on the hot path.

Plans are cached per thread (threading.local) and keyed by
(size, direction): each pyFFTW.FFTW object owns its aligned arrays, so a
plan is only ever executed by the thread that made it, and concurrent calls
from several threads never share buffers (FFTW's execute of distinct plans
is thread-safe). Plan creation and every wisdom import/export is done
under one lock (FFTW's planner is not thread-safe; pyFFTW also has a lock
of its own around planning).

Wisdom file: ``$PYFRACCONV_CACHE_DIR/fftw-wisdom.bin``, else
``$XDG_CACHE_HOME/pyfracconv/fftw-wisdom.bin``, else
``~/.cache/pyfracconv/fftw-wisdom.bin``. Its format (no pickle)::

    8 bytes  magic b"PFCFFTW\\x00"
    u32 LE   format version (1)
    u32 LE   block count (3: double, single, long double wisdom)
    3 x      u64 LE length, then that many bytes (FFTW wisdom text)
    u32 LE   CRC-32 (zlib.crc32) of every byte before it

A file that fails any check is ignored with a warning.
"""

from __future__ import annotations

import collections
import os
import struct
import tempfile
import threading
import warnings
import zlib

import numpy as np

try:  # pyFFTW is optional at run time: the C engine is the fallback
    import pyfftw
except Exception:  # pragma: no cover - exercised only without pyFFTW
    pyfftw = None

__all__ = [
    "available",
    "cache_dir",
    "wisdom_path",
    "write_wisdom_file",
    "read_wisdom_file",
    "load_wisdom",
    "use_fftw",
    "lagged_sum_fft",
    "build_plans",
    "reset",
    "WisdomFileError",
]

MAGIC = b"PFCFFTW\x00"
VERSION = 1
NBLOCKS = 3
FILE_NAME = "fftw-wisdom.bin"
MAX_BLOCK = 64 << 20  # no sane wisdom is this large; refuse bigger lengths

# Crossovers (log2 of the transform size P) at which use_fftw() says yes.
# None: never for that kind of plan. Measured: never faster than the C FFT
# (module doc), so both are None. TUNED_* also bound the sizes that
# build_plans() plans by default.
TUNED_MIN_LOG2 = None
TUNED_MAX_LOG2 = 22
ESTIMATE_MIN_LOG2 = None
MAX_LOG2 = 30  # the C engine's limit (FC_MAX_LOG2)

# Most (size, direction) plans kept per thread; each owns two arrays of
# about 8P bytes, so a few large sizes are all that is worth keeping.
CACHE_ENTRIES = 8

_lock = threading.RLock()
_local = threading.local()
_state = {
    "generation": 0,  # bumped when wisdom changes: thread caches drop plans
    "loaded": None,  # the wisdom file path imported last (or tried)
}


class WisdomFileError(ValueError):
    """A wisdom cache file that is not in this module's format."""


def available():
    """True if pyFFTW could be imported."""
    return pyfftw is not None


# ---------------------------------------------------------------- cache file


def cache_dir():
    """The user cache folder of pyfracconv (not created here)."""
    d = os.environ.get("PYFRACCONV_CACHE_DIR")
    if d:
        return os.path.abspath(os.path.expanduser(d))
    xdg = os.environ.get("XDG_CACHE_HOME")
    if xdg and os.path.isabs(xdg):
        return os.path.join(xdg, "pyfracconv")
    return os.path.join(os.path.expanduser("~"), ".cache", "pyfracconv")


def wisdom_path():
    """The path of the FFTW wisdom cache file."""
    return os.path.join(cache_dir(), FILE_NAME)


def encode_wisdom(blocks):
    """The file bytes for a tuple of 3 bytes objects (pyfftw.export_wisdom)."""
    blocks = tuple(blocks)
    if len(blocks) != NBLOCKS or not all(isinstance(b, bytes) for b in blocks):
        raise WisdomFileError(f"expected {NBLOCKS} bytes objects, got {blocks!r:.80}")
    parts = [MAGIC, struct.pack("<II", VERSION, NBLOCKS)]
    for b in blocks:
        parts.append(struct.pack("<Q", len(b)))
        parts.append(b)
    body = b"".join(parts)
    return body + struct.pack("<I", zlib.crc32(body) & 0xFFFFFFFF)


def decode_wisdom(data):
    """The 3 wisdom blocks in ``data``; WisdomFileError naming what is wrong."""
    data = bytes(data)
    head = len(MAGIC) + 8
    if len(data) < head + 4:
        raise WisdomFileError(f"too short ({len(data)} bytes)")
    if data[: len(MAGIC)] != MAGIC:
        raise WisdomFileError("not a pyfracconv FFTW wisdom file (bad magic)")
    version, count = struct.unpack_from("<II", data, len(MAGIC))
    if version != VERSION:
        raise WisdomFileError(f"format version {version}, expected {VERSION}")
    if count != NBLOCKS:
        raise WisdomFileError(f"{count} blocks, expected {NBLOCKS}")
    body, (crc,) = data[:-4], struct.unpack("<I", data[-4:])
    if zlib.crc32(body) & 0xFFFFFFFF != crc:
        raise WisdomFileError("checksum mismatch (file damaged or truncated)")
    pos, blocks = head, []
    for i in range(NBLOCKS):
        if pos + 8 > len(body):
            raise WisdomFileError(f"block {i}: length field past the end")
        (length,) = struct.unpack_from("<Q", body, pos)
        pos += 8
        if length > MAX_BLOCK or pos + length > len(body):
            raise WisdomFileError(f"block {i}: length {length} past the end")
        block = body[pos : pos + length]
        pos += length
        if block and not block.startswith(b"(fftw"):
            raise WisdomFileError(f"block {i}: not FFTW wisdom text")
        blocks.append(block)
    if pos != len(body):
        raise WisdomFileError(f"{len(body) - pos} stray bytes after the blocks")
    return tuple(blocks)


def write_wisdom_file(path, blocks):
    """Write ``blocks`` to ``path`` atomically (temporary file + rename)."""
    data = encode_wisdom(blocks)
    folder = os.path.dirname(os.path.abspath(path))
    os.makedirs(folder, exist_ok=True)
    fd, tmp = tempfile.mkstemp(prefix=".fftw-wisdom-", dir=folder)
    try:
        with os.fdopen(fd, "wb") as fh:
            fh.write(data)
        os.replace(tmp, path)
    except BaseException:
        try:
            os.unlink(tmp)
        except OSError:
            pass
        raise
    return len(data)


def read_wisdom_file(path):
    """The 3 wisdom blocks stored in ``path`` (OSError, WisdomFileError)."""
    with open(path, "rb") as fh:
        data = fh.read(MAX_BLOCK * NBLOCKS + 64)
    return decode_wisdom(data)


def load_wisdom(path=None):
    """Import the wisdom of ``path`` (default :func:`wisdom_path`) into FFTW.

    Returns True if double-precision wisdom was imported. A missing file
    returns False silently; an unreadable, corrupt or rejected one returns
    False with a warning (it never raises)."""
    if pyfftw is None:
        return False
    path = wisdom_path() if path is None else path
    with _lock:
        _state["loaded"] = path
        _state["generation"] += 1  # plans made before are remade on next use
        if not os.path.isfile(path):  # no cache file (yet): nothing to say
            return False
        try:
            blocks = read_wisdom_file(path)
        except (OSError, WisdomFileError) as exc:
            warnings.warn(
                f"pyfracconv: ignoring FFTW wisdom file {path!r}: {exc}", RuntimeWarning, stacklevel=2
            )
            return False
        if not blocks[0]:
            return False
        try:
            ok = pyfftw.import_wisdom(blocks)
        except Exception as exc:  # pragma: no cover - pyFFTW refused the tuple
            ok = (False,)
            warnings.warn(
                f"pyfracconv: ignoring FFTW wisdom file {path!r}: {exc}", RuntimeWarning, stacklevel=2
            )
        else:
            if not ok[0]:
                warnings.warn(
                    f"pyfracconv: ignoring FFTW wisdom file {path!r}: FFTW did not "
                    f"accept it (made by another FFTW version?); rerun "
                    f"'pyfracconv fftw-plan'",
                    RuntimeWarning,
                    stacklevel=2,
                )
        return bool(ok[0])


def reset():
    """Forget all FFTW wisdom and every thread's plans; the cache file is
    read again at the next use."""
    if pyfftw is None:
        return
    with _lock:
        pyfftw.forget_wisdom()
        _state["loaded"] = None
        _state["generation"] += 1


def _ensure_wisdom():
    """Import the cache file once per process (again if its path changed)."""
    path = wisdom_path()
    if _state["loaded"] != path:
        with _lock:
            if _state["loaded"] != path:
                load_wisdom(path)


# ---------------------------------------------------------------- plans


def transform_size(n, klen):
    """The C engine's transform size for n samples and klen kernel values."""
    need = n + min(klen, n) - 1
    p = 2
    while p < need:
        p *= 2
    return p


def _make(P, direction, flags):
    """A pyFFTW plan of the real transform of size P with its own arrays."""
    real = pyfftw.empty_aligned(P, dtype="float64")
    spec = pyfftw.empty_aligned(P // 2 + 1, dtype="complex128")
    if direction == "forward":
        return pyfftw.FFTW(real, spec, direction="FFTW_FORWARD", flags=flags, threads=1)
    return pyfftw.FFTW(
        spec, real, direction="FFTW_BACKWARD", flags=flags + ("FFTW_DESTROY_INPUT",), threads=1
    )


def _thread_cache():
    c = getattr(_local, "cache", None)
    gen = _state["generation"]
    if c is None or _local.generation != gen:
        c = collections.OrderedDict()
        _local.cache = c
        _local.generation = gen
    return c


def get_plan(P, direction, estimate=True):
    """The calling thread's plan for (P, direction): ``(fftw_object, tuned)``.

    Made with FFTW_WISDOM_ONLY (tuned=True) if the wisdom covers it, else
    with FFTW_ESTIMATE (tuned=False), or None if ``estimate`` is false;
    cached per thread (an untuned size is remembered too)."""
    if direction not in ("forward", "backward"):
        raise ValueError(f"direction={direction!r}: expected 'forward' or 'backward'")
    _ensure_wisdom()
    cache = _thread_cache()
    key = (P, direction)
    hit = cache.get(key)
    if hit is not None and (hit[0] is not None or not estimate):
        cache.move_to_end(key)
        return hit if hit[0] is not None else None
    with _lock:
        entry = None
        if hit is None:  # an untuned size is not asked again
            try:
                entry = (_make(P, direction, ("FFTW_WISDOM_ONLY",)), True)
            except RuntimeError:  # no wisdom for this plan
                entry = None
        if entry is None and estimate:
            entry = (_make(P, direction, ("FFTW_ESTIMATE",)), False)
    cache[key] = entry if entry is not None else (None, False)
    cache.move_to_end(key)
    while len(cache) > CACHE_ENTRIES:
        cache.popitem(last=False)
    return entry


def _is_tuned(P):
    """True if the wisdom has both plans of size P (plans cached per thread;
    no FFTW_ESTIMATE plan is made here)."""
    return (
        get_plan(P, "forward", estimate=False) is not None
        and get_plan(P, "backward", estimate=False) is not None
    )


def use_fftw(n, klen):
    """True if lagged_sum(engine='fft') should run through pyFFTW, by the
    crossovers above (with the measured values: never)."""
    if pyfftw is None or n < 1:
        return False
    P = transform_size(n, klen)
    lg = P.bit_length() - 1
    if lg > MAX_LOG2:
        return False  # the C engine reports the size error
    if ESTIMATE_MIN_LOG2 is not None and lg >= ESTIMATE_MIN_LOG2:
        return True
    if TUNED_MIN_LOG2 is not None and TUNED_MIN_LOG2 <= lg <= TUNED_MAX_LOG2:
        return _is_tuned(P)
    return False


def lagged_sum_fft(block, kernel):
    """Single-FFT lagged sum of every row of ``block`` (nsig, n), C-contiguous
    float64, with the 1-D float64 ``kernel``: y[s, i] = sum_{m<=i} c_m x[s, i-m].
    Arguments are assumed checked (finite, non-empty)."""
    nsig, n = block.shape
    Ku = min(kernel.size, n)
    P = transform_size(n, kernel.size)
    fwd, _ = get_plan(P, "forward")
    bwd, _ = get_plan(P, "backward")
    a = fwd.input_array
    s = fwd.output_array
    z = bwd.input_array
    r = bwd.output_array
    a[:Ku] = kernel[:Ku]
    a[Ku:] = 0.0
    fwd.execute()
    kspec = s * (1.0 / P)
    out = np.empty((nsig, n), dtype=np.float64)
    a[Ku:] = 0.0  # stays zero past n below, as n >= Ku
    for i in range(nsig):
        a[:n] = block[i]
        fwd.execute()
        np.multiply(s, kspec, out=z)
        bwd.execute()
        out[i] = r[:n]
    return out


# ---------------------------------------------------------------- fftw-plan

EFFORTS = {"measure": "FFTW_MEASURE", "patient": "FFTW_PATIENT"}


def build_plans(max_log2, effort="measure", min_log2=None, path=None, progress=None):
    """Plan the real transforms of sizes 2^min_log2 .. 2^max_log2 (both
    directions) with FFTW_MEASURE or FFTW_PATIENT and store all wisdom
    (what the file already held included) in ``path``.

    Returns ``(sizes, path, nbytes)``. ``progress(P, seconds)`` is called
    after each size."""
    import time

    if pyfftw is None:
        raise RuntimeError("pyFFTW is not installed (pip install pyfftw)")
    if effort not in EFFORTS:
        raise ValueError(f"effort={effort!r}: expected one of {', '.join(EFFORTS)}")
    if min_log2 is None:
        min_log2 = min(TUNED_MIN_LOG2 or 1, max_log2)
    path = wisdom_path() if path is None else path
    flags = (EFFORTS[effort],)
    sizes = []
    with _lock:
        load_wisdom(path)  # keep what the file already knows
        for lg in range(max(1, min_log2), max_log2 + 1):
            P = 1 << lg
            t0 = time.perf_counter()
            _make(P, "forward", flags)
            _make(P, "backward", flags)
            sizes.append(P)
            if progress is not None:
                progress(P, time.perf_counter() - t0)
        nbytes = write_wisdom_file(path, pyfftw.export_wisdom())
        _state["loaded"] = path
        _state["generation"] += 1
    return sizes, path, nbytes
