"""Run the benchmark suites and print the README's tables (Markdown).

    python bench/report.py                    # every suite
    python bench/report.py batch fft          # some of them

Each suite is a pytest-benchmark file in bench/; every group of a suite
holds the contenders measured in the same run, and the table gives each
one's median and its ratio to the first pyfracconv row of the group.
"""

from __future__ import annotations

import json
import os
import platform
import subprocess
import sys
import tempfile

HERE = os.path.dirname(os.path.abspath(__file__))
SUITES = {
    "batch": "test_bench_batch.py",
    "fft": "test_bench_fft.py",
    "fftw": "test_bench_fftw.py",
    "stream": "test_bench_stream.py",
    "compressed": "test_bench_compressed.py",
    "records": "test_bench_records.py",
    "dask": "test_bench_dask.py",
    "workers": "test_bench_workers.py",
}
SCRIPTS = {
    "batch": ["batch_sweep.py", "first_call.py"],
    "stream": ["stream_memory.py"],
    "compressed": ["soe_terms.py"],
    "records": ["records_1e8.py"],
    "workers": ["workers_scaling.py"],
}


def machine():
    model = platform.processor() or platform.machine()
    try:
        with open("/proc/cpuinfo") as fh:
            for line in fh:
                if line.startswith("model name"):
                    model = line.split(":", 1)[1].strip()
                    break
    except OSError:
        pass
    import numpy

    return (
        f"{model}, {os.cpu_count()} cores, {platform.system()} "
        f"{platform.machine()}, Python {platform.python_version()}, "
        f"NumPy {numpy.__version__}"
    )


def fmt_time(s):
    for unit, f in (("s", 1.0), ("ms", 1e3), ("us", 1e6), ("ns", 1e9)):
        if s * f >= 1.0 or unit == "ns":
            return f"{s * f:.3g} {unit}"
    return f"{s:g} s"


def run_suite(path):
    with tempfile.TemporaryDirectory() as tmp:
        out = os.path.join(tmp, "bench.json")
        cmd = [
            sys.executable,
            "-m",
            "pytest",
            path,
            "-q",
            "-p",
            "no:cacheprovider",
            f"--benchmark-json={out}",
            "--benchmark-min-rounds=5",
        ]
        proc = subprocess.run(cmd, capture_output=True, text=True)
        if proc.returncode != 0 or not os.path.exists(out):
            sys.stderr.write(proc.stdout[-4000:] + proc.stderr[-4000:])
            raise SystemExit(f"{path}: benchmark run failed ({proc.returncode})")
        with open(out) as fh:
            return json.load(fh), proc.stdout


def tables(data):
    groups = {}
    for b in data["benchmarks"]:
        groups.setdefault(b.get("group") or b["name"], []).append(b)
    lines = []
    for g, rows in groups.items():
        base = next((r for r in rows if "pyfracconv" in r["name"]), rows[0])
        lines.append(f"\n**{g}**\n")
        lines.append("| benchmark | median | min | ratio to pyfracconv |")
        lines.append("|---|---|---|---|")
        for r in rows:
            st = r["stats"]
            ratio = st["median"] / base["stats"]["median"]
            extra = r.get("extra_info") or {}
            note = "; ".join(f"{k} {v}" for k, v in extra.items())
            name = r["name"].split("[")[0].replace("test_", "")
            param = r.get("param") or ""
            label = f"{name} {param}".strip() + (f" ({note})" if note else "")
            lines.append(f"| {label} | {fmt_time(st['median'])} | {fmt_time(st['min'])} | {ratio:.2f} |")
    return "\n".join(lines)


def main(argv=None):
    argv = sys.argv[1:] if argv is None else argv
    chosen = argv or list(SUITES)
    unknown = [c for c in chosen if c not in SUITES]
    if unknown:
        raise SystemExit(f"unknown suite(s) {unknown}; choose from {list(SUITES)}")
    print(f"Machine: {machine()}.")
    for name in chosen:
        path = os.path.join(HERE, SUITES[name])
        if not os.path.exists(path):
            continue
        data, _ = run_suite(path)
        print(f"\n### {name}\n")
        print(tables(data))
        for script in SCRIPTS.get(name, []):
            sp = os.path.join(HERE, script)
            if os.path.exists(sp):
                proc = subprocess.run([sys.executable, sp], capture_output=True, text=True, check=True)
                print("\n" + proc.stdout.strip())


if __name__ == "__main__":
    main()
