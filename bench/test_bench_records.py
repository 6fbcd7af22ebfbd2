"""Records from file to file: pyfracconv.records.apply_npy (memory-mapped,
chunked, compressed or exact) against what a user would write with the
record in memory (np.load, the batch integral, np.save), every contender
in the same run; and the out-of-core run on a record larger than a memory
limit set here, its peak resident memory measured in a fresh process.

    python -m pytest bench/test_bench_records.py --benchmark-group-by=group

The 1e8-sample run is bench/records_1e8.py (a script: it takes longer).
"""

import json
import os
import subprocess
import sys

import numpy as np
import pytest

import pyfracconv
from pyfracconv import Stream, records

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
from records_1e8 import CHILD, write_record  # noqa: E402

ORDER, STEP = 0.5, 1e-4
N = 2**22  # 32 MiB of float64


@pytest.fixture(scope="module")
def record(tmp_path_factory):
    d = tmp_path_factory.mktemp("records")
    path = str(d / "record.npy")
    write_record(path, N)
    return path


def in_memory_batch(inp, out):
    x = np.load(inp)
    np.save(out, pyfracconv.integral(x, ORDER, STEP))


def in_memory_compressed(inp, out):
    x = np.load(inp)
    s = Stream.integral(ORDER, STEP, mode="compressed", horizon=len(x))
    np.save(out, s.push_many(x))


CONTENDERS = {
    "apply_npy compressed": lambda i, o: records.apply_npy(i, o, "integral", ORDER, STEP),
    "apply_npy exact": lambda i, o: records.apply_npy(i, o, "integral", ORDER, STEP, mode="exact"),
    "in memory: np.load + integral + np.save": in_memory_batch,
    "in memory: np.load + compressed push_many + np.save": in_memory_compressed,
}


@pytest.mark.parametrize("name", list(CONTENDERS))
def test_record_2_22(benchmark, record, tmp_path, name):
    benchmark.group = "record of 2^22 samples, file to file"
    out = str(tmp_path / "out.npy")
    benchmark.pedantic(CONTENDERS[name], args=(record, out), rounds=3, iterations=1)
    y = np.load(out, mmap_mode="r")
    assert y.shape == (N,) and np.isfinite(y[-1])
    if benchmark.stats is not None:
        benchmark.extra_info["ns_per_sample"] = benchmark.stats.stats.median / N * 1e9


def _peak(inp, out, mode):
    proc = subprocess.run(
        [sys.executable, "-c", CHILD, inp, out, mode, repr(ORDER), repr(STEP), "1e-12"],
        capture_output=True,
        text=True,
        check=True,
    )
    return json.loads(proc.stdout.strip().splitlines()[-1])


def test_out_of_core_under_a_memory_limit(benchmark, tmp_path):
    """A record of 2^24 samples (128 MiB) under a limit of 100 MiB of peak
    resident memory, mapped file pages included (measured by the child
    itself, bench/records_1e8.py)."""
    benchmark.group = "out of core: 2^24 samples (128 MiB), limit 100 MiB"
    limit = 100 * 2**20
    n = 2**24
    inp, out = str(tmp_path / "big.npy"), str(tmp_path / "big_out.npy")
    write_record(inp, n)
    r = benchmark.pedantic(_peak, args=(inp, out, "compressed"), rounds=1, iterations=1)
    benchmark.extra_info["peak_rss_mib"] = round(r["rss_self"] / 2**20, 1)
    benchmark.extra_info["record_mib"] = os.path.getsize(inp) // 2**20
    assert os.path.getsize(inp) > limit
    assert r["rss_self"] < limit, r
    # the head of the result is the batch integral of the head (causal)
    head = np.array(np.load(inp, mmap_mode="r")[:4096])
    ref = pyfracconv.integral(head, ORDER, STEP)
    scale = pyfracconv.integral(np.abs(head), ORDER, STEP)
    got = np.load(out, mmap_mode="r")[:4096]
    assert np.all(np.abs(got - ref) <= (1e-12 + 128 * 2.0**-52) * scale)
