"""The objects, inputs and worker of tests/test_checkpoint_files.py.

``make(kind)`` builds a fresh object, ``step_block(obj, kind, n0)`` advances
it by one block of BLOCK samples (steps) starting at sample index n0 and
returns the block's outputs as one float64 array, ``position(obj)`` is the
number of samples (steps) it has taken. The inputs are invented test
signals, fixed functions of the sample index, so that every process
computes the same ones.

Run as a script, this is a fork server: it imports everything once, then
for every line ``<kind> <path>`` on stdin it forks a worker and prints the
worker's pid. The worker loads the checkpoint at ``path``, then advances
block by block and writes a checkpoint (``save_file``) after every block,
forever; the test kills it with SIGKILL. A line ``reap <pid>`` waits for
that worker and prints how it ended.
"""

import math
import os
import sys

import numpy as np

import pyfracconv as pf

BLOCK = 16
KINDS = ("stream-exact", "stream-compressed", "stream-timed", "stepper", "controller")


def _signal(n0, n=BLOCK):
    k = np.arange(n0, n0 + n, dtype=np.float64)
    return np.sin(0.37 * k) + 0.25 * np.cos(1.3 * k + 0.5)


def _rhs(t, y):
    # relaxation with a forcing term: D^a y = -y + sin(3 t)
    return -y + math.sin(3.0 * t)


def make(kind):
    if kind == "stream-exact":
        return pf.Stream.integral(0.6, 0.01)
    if kind == "stream-compressed":
        return pf.Stream.derivative(0.4, 0.01, rule="l1", mode="compressed", tol=1e-9, horizon=1e5)
    if kind == "stream-timed":
        return pf.TimedStream(0.6, min_step=0.005, horizon=1e4)
    if kind == "stepper":
        return pf.Stepper(_rhs, 1.0, 0.7, 0.01)
    if kind == "controller":
        return pf.Controller(
            kp=2.0,
            ki=1.5,
            kd=0.2,
            integral_order=0.6,
            derivative_order=0.5,
            step=0.01,
            output_limits=(-1.5, 1.5),
            rate_limit=40.0,
            derivative_filter=0.02,
            memory="compressed",
            horizon=1e5,
        )
    raise ValueError(kind)


def load(kind, path):
    if kind == "stream-timed":
        return pf.TimedStream.load_file(path)
    if kind.startswith("stream"):
        return pf.Stream.load_file(path)
    if kind == "stepper":
        return pf.Stepper.load_file(path, _rhs)
    return pf.Controller.load_file(path)


def position(obj):
    return obj.steps if isinstance(obj, pf.Stepper) else obj.count


def _times(n0, n=BLOCK):
    # invented jittered sample times, steps 0.006 .. 0.014
    k = np.arange(n0, n0 + n, dtype=np.float64)
    return 0.01 * k + 0.002 * np.sin(k)


def step_block(obj, kind, n0):
    if kind == "stream-timed":
        return np.asarray(obj.push_many(_times(n0), _signal(n0)), dtype=np.float64)
    if kind.startswith("stream"):
        return np.asarray(obj.push_many(_signal(n0)), dtype=np.float64)
    if kind == "stepper":
        t, y = obj.advance(BLOCK)
        return np.concatenate([t, y])
    # a setpoint step at sample 200 and an invented measurement
    r = np.where(np.arange(n0, n0 + BLOCK) >= 200, 1.0, 0.0)
    return obj.update_block(r, 0.8 * _signal(n0))


# NAIVE_WRITER=1 in the environment: the workers write their checkpoints
# in place (open, truncate, write in pieces) instead of save_file, to show
# that the test fails on a writer that is not atomic (it does: a kill
# between the truncation and the last piece leaves a short file).
NAIVE = bool(os.environ.get("NAIVE_WRITER"))


def naive_write(path, data):
    with open(path, "wb") as fh:
        for i in range(0, len(data), 512):
            fh.write(data[i : i + 512])
            fh.flush()
            os.fsync(fh.fileno())


def work(kind, path):
    obj = load(kind, path)
    n = position(obj)
    while True:
        step_block(obj, kind, n)
        n += BLOCK
        if NAIVE:
            naive_write(path, obj.save())
        else:
            obj.save_file(path)


def serve():
    for line in sys.stdin:
        words = line.split()
        if words[0] == "reap":
            _, status = os.waitpid(int(words[1]), 0)
            how = (
                f"signal {os.WTERMSIG(status)}"
                if os.WIFSIGNALED(status)
                else f"exit {os.WEXITSTATUS(status)}"
            )
            print(how, flush=True)
            continue
        kind, path = words
        pid = os.fork()
        if pid == 0:
            code = 0
            try:
                work(kind, path)
            except BaseException as exc:  # noqa: BLE001 - reported by the exit code
                sys.stderr.write(f"worker: {type(exc).__name__}: {exc}\n")
                code = 3
            os._exit(code)
        print(pid, flush=True)


if __name__ == "__main__":
    serve()
