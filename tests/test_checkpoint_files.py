"""Crash-safe checkpoint files (issue 14, item 5).

``save_file`` / ``load_file`` of every object with state (exact and
compressed streams, the solver's Stepper, the Controller) go through the C
library's ``fc_file_write`` (a temporary file in the same directory,
written in full, fsync, rename over the target, directory fsync) and
``fc_file_read`` (bounded). The promise, csrc/fracconv.h: at every moment
the file holds the complete old checkpoint or the complete new one.

The first test shows it under SIGKILL. A worker process
(tests/checkpoint_worker.py) resumes from the checkpoint file, advances its
object block by block and writes a checkpoint after every block; it is
killed with SIGKILL after a random delay (seeded), many times, each new
worker resuming from what the last one left. After every kill the file
must load, hold a whole number of blocks, never go backwards, hold the very
state (the save() bytes) of an uninterrupted run at that point, and the
run resumed from it must give, bit for bit, the outputs of the
uninterrupted run (NAIVE_WRITER=1 makes the workers write in place,
without the temporary file and rename: the test then fails, with a
truncated file after some kill). The rename-based sequence is the usual POSIX practice
(rename is atomic, POSIX.1-2008 "rename"; the directory sync, Pillai et
al., "All File Systems Are Not Created Equal", OSDI 2014).

The other tests: a missing directory, an unwritable directory, a write
that fails half way (the file size limit, setrlimit RLIMIT_FSIZE), a target
that is a directory: FileError naming the path, the old file byte for byte
as it was, no temporary left, the object unchanged; a missing, truncated,
garbage, foreign or too long file: FileError or StateError naming the
path, nothing loaded. Test signals are invented (checkpoint_worker.py).
"""

import errno
import os
import random
import signal
import subprocess
import sys
import time

import numpy as np
import pytest

import pyfracconv as pf
from pyfracconv._fracconv import ffi, lib

import checkpoint_worker as cw

HERE = os.path.dirname(os.path.abspath(__file__))

# rounds of start-and-kill per object, and the longest delay before a kill
# (seconds); about 3 s per object on the 2-core machine (measured 2026-12)
ROUNDS = 100
MAX_DELAY = 0.04
RESUME_BLOCKS = 3


def _bits(a):
    return np.ascontiguousarray(a, dtype=np.float64).tobytes()


class Uninterrupted:
    """The uninterrupted run of one kind: outputs of every block so far,
    and a second run kept at the position asked for (its state)."""

    def __init__(self, kind):
        self.kind = kind
        self.ahead = cw.make(kind)
        self.outputs = []  # outputs[j]: bytes of block j
        self.at = cw.make(kind)

    def block_outputs(self, j):
        while len(self.outputs) <= j:
            n0 = len(self.outputs) * cw.BLOCK
            self.outputs.append(_bits(cw.step_block(self.ahead, self.kind, n0)))
        return self.outputs[j]

    def state_at(self, n):
        pos = cw.position(self.at)
        assert pos <= n
        while pos < n:
            cw.step_block(self.at, self.kind, pos)
            pos += cw.BLOCK
        return self.at.save()


@pytest.fixture(scope="module")
def server():
    env = dict(os.environ, PYTHONPATH=HERE + os.pathsep + os.environ.get("PYTHONPATH", ""))
    proc = subprocess.Popen(
        [sys.executable, os.path.join(HERE, "checkpoint_worker.py")],
        stdin=subprocess.PIPE,
        stdout=subprocess.PIPE,
        text=True,
        env=env,
    )
    yield proc
    proc.stdin.close()
    proc.wait(timeout=30)


def _ask(proc, line):
    proc.stdin.write(line + "\n")
    proc.stdin.flush()
    return proc.stdout.readline().strip()


@pytest.mark.parametrize("kind", cw.KINDS)
def test_sigkill_during_checkpoints_leaves_a_file_that_resumes_bit_for_bit(kind, server, tmp_path):
    rng = random.Random(f"checkpoint-{kind}")  # seeded: the same delays every run
    ref = Uninterrupted(kind)
    path = str(tmp_path / "state.ckpt")
    cw.make(kind).save_file(path)  # the checkpoint at sample 0
    last = 0
    killed = 0
    temps = set()
    for rnd in range(ROUNDS):
        pid = int(_ask(server, f"{kind} {path}"))
        time.sleep(rng.uniform(0.0, MAX_DELAY))
        os.kill(pid, signal.SIGKILL)
        how = _ask(server, f"reap {pid}")
        assert how == f"signal {int(signal.SIGKILL)}", f"round {rnd}: worker ended with {how}"
        killed += 1

        obj = cw.load(kind, path)  # the file always loads
        n = cw.position(obj)
        assert n % cw.BLOCK == 0 and n >= last, (rnd, n, last)
        last = n
        # the very state of the uninterrupted run at that point
        assert obj.save() == ref.state_at(n), f"round {rnd}: state at {n} differs"
        # and the resumed run continues it bit for bit
        j0 = n // cw.BLOCK
        for j in range(j0, j0 + RESUME_BLOCKS):
            got = _bits(cw.step_block(obj, kind, j * cw.BLOCK))
            assert got == ref.block_outputs(j), f"round {rnd}: block {j} differs"
        # a killed write leaves at most its own temporary, never a bad target
        for name in os.listdir(tmp_path):
            assert name == "state.ckpt" or name.startswith("state.ckpt.tmp-"), name
            if name != "state.ckpt":
                temps.add(name)
    assert killed == ROUNDS
    # the workers made progress: checkpoints were written between the kills
    assert last > 0
    print(f"STATS {kind}: {last} samples, {len(temps)} temporaries left by kills during a write")


# ------------------------------------------------------------ errors

OBJECTS = list(cw.KINDS)


def _made(kind):
    obj = cw.make(kind)
    for j in range(4):
        cw.step_block(obj, kind, j * cw.BLOCK)
    return obj


def _unchanged(kind, obj, before):
    """obj's state is ``before`` and its next block is that of a twin
    loaded from ``before``."""
    assert obj.save() == before
    twin = {"stepper": lambda b: pf.Stepper.load(b, cw._rhs)}.get(kind, type(obj).load)(before)
    n = cw.position(obj)
    assert _bits(cw.step_block(obj, kind, n)) == _bits(cw.step_block(twin, kind, n))


@pytest.mark.parametrize("kind", OBJECTS)
def test_file_is_the_save_bytes_and_new_files_are_private(kind, tmp_path):
    obj = _made(kind)
    path = tmp_path / "a.ckpt"
    obj.save_file(path)  # os.PathLike accepted
    assert path.read_bytes() == obj.save()
    assert os.stat(path).st_mode & 0o777 == 0o600  # mkstemp's mode (fracconv.h)
    assert os.listdir(tmp_path) == ["a.ckpt"]
    again = cw.load(kind, str(path))
    assert again.save() == obj.save()
    # bytes paths too; replacing an existing file keeps its permission bits
    os.chmod(path, 0o640)
    cw.step_block(obj, kind, cw.position(obj))
    obj.save_file(os.fsencode(str(path)))
    assert path.read_bytes() == obj.save()
    assert os.stat(path).st_mode & 0o777 == 0o640
    assert os.listdir(tmp_path) == ["a.ckpt"]


@pytest.mark.parametrize("kind", OBJECTS)
def test_missing_directory(kind, tmp_path):
    obj = _made(kind)
    before = obj.save()
    path = str(tmp_path / "no-such-dir" / "a.ckpt")
    with pytest.raises(pf.FileError) as info:
        obj.save_file(path)
    assert path in str(info.value) and "No such file or directory" in str(info.value)
    assert info.value.errno == errno.ENOENT and info.value.filename == path
    assert isinstance(info.value, OSError)
    assert not os.path.exists(tmp_path / "no-such-dir")
    _unchanged(kind, obj, before)
    with pytest.raises(pf.FileError, match="load_file.*no-such-dir.*No such file") as info:
        cw.load(kind, path)
    assert info.value.errno == errno.ENOENT


def _in_child(code, cwd):
    """Run ``code`` in a fresh interpreter in ``cwd``; its stdout."""
    env = dict(os.environ, PYTHONPATH=HERE + os.pathsep + os.environ.get("PYTHONPATH", ""))
    res = subprocess.run(
        [sys.executable, "-c", code], cwd=cwd, env=env, capture_output=True, text=True, timeout=120
    )
    assert res.returncode == 0, res.stderr
    return res.stdout


# The child checks the refusal and that the object is unchanged; the
# parent checks the old file and the directory.
CHILD = r"""
import errno, os, resource, signal, sys
import checkpoint_worker as cw
import pyfracconv as pf
kind, how = {args}
obj = cw.make(kind)
for j in range(40):
    cw.step_block(obj, kind, j * cw.BLOCK)
before = obj.save()
if how == "unwritable" and os.geteuid() == 0:
    os.setuid(65534)           # root writes anywhere: drop to nobody
if how == "fsize":
    signal.signal(signal.SIGXFSZ, signal.SIG_IGN)
    resource.setrlimit(resource.RLIMIT_FSIZE, (len(before) // 2, len(before) // 2))
try:
    obj.save_file("old.ckpt")
except pf.FileError as exc:
    print(exc.errno)
    print(exc)
else:
    print("no error")
assert obj.save() == before
n = cw.position(obj)
twin = {{"stepper": lambda b: pf.Stepper.load(b, cw._rhs)}}.get(kind, type(obj).load)(before)
assert cw.step_block(obj, kind, n).tobytes() == cw.step_block(twin, kind, n).tobytes()
"""


def _old_file(d):
    old = b"an old checkpoint that must survive " * 3
    (d / "old.ckpt").write_bytes(old)
    return old


@pytest.mark.parametrize("kind", OBJECTS)
def test_unwritable_directory(kind, tmp_path):
    d = tmp_path / "ro"
    d.mkdir()
    old = _old_file(d)
    os.chmod(d, 0o555)
    try:
        out = _in_child(CHILD.format(args=(kind, "unwritable")), str(d)).splitlines()
    finally:
        os.chmod(d, 0o755)
    assert out[0] == str(errno.EACCES), out
    assert "save_file(path='old.ckpt')" in out[1] and "Permission denied" in out[1]
    assert (d / "old.ckpt").read_bytes() == old
    assert sorted(os.listdir(d)) == ["old.ckpt"]


@pytest.mark.parametrize("kind", OBJECTS)
def test_write_failing_half_way_removes_the_temporary(kind, tmp_path):
    # the file size limit stops the write of the temporary half way
    # (write(2) fails with EFBIG once SIGXFSZ is ignored)
    old = _old_file(tmp_path)
    out = _in_child(CHILD.format(args=(kind, "fsize")), str(tmp_path)).splitlines()
    assert out[0] == str(errno.EFBIG), out
    assert "save_file(path='old.ckpt')" in out[1] and "unchanged" in out[1]
    assert (tmp_path / "old.ckpt").read_bytes() == old
    assert sorted(os.listdir(tmp_path)) == ["old.ckpt"]


@pytest.mark.parametrize("kind", OBJECTS)
def test_target_that_is_a_directory(kind, tmp_path):
    # the temporary is written in full; the rename fails; it is removed
    obj = _made(kind)
    before = obj.save()
    (tmp_path / "d").mkdir()
    (tmp_path / "d" / "inside").write_bytes(b"x")
    path = str(tmp_path / "d")
    with pytest.raises(pf.FileError, match="save_file.*Is a directory") as info:
        obj.save_file(path)
    assert info.value.errno == errno.EISDIR
    assert sorted(os.listdir(tmp_path)) == ["d"]
    assert os.listdir(tmp_path / "d") == ["inside"]
    _unchanged(kind, obj, before)
    with pytest.raises(pf.FileError, match="load_file.*Is a directory"):
        cw.load(kind, path)
    with pytest.raises(pf.ArgumentError, match="names a directory"):
        obj.save_file(path + "/")


@pytest.mark.parametrize("kind", OBJECTS)
def test_truncated_garbage_foreign_and_long_files(kind, tmp_path):
    obj = _made(kind)
    good = obj.save()
    path = tmp_path / "f.ckpt"
    rng = np.random.default_rng(14)
    cuts = sorted(
        set([0, 1, 7, 8, 9, 15, 16, len(good) // 2, len(good) - 1] + rng.integers(0, len(good), 20).tolist())
    )
    for cut in cuts:
        path.write_bytes(good[:cut])
        with pytest.raises(pf.StateError) as info:
            cw.load(kind, str(path))
        assert str(path) in str(info.value), (cut, str(info.value))
    for seed in range(5):
        path.write_bytes(np.random.default_rng(seed).bytes(len(good)))
        with pytest.raises(pf.StateError, match="load_file"):
            cw.load(kind, str(path))
    # garbage behind a valid start: one flipped byte in the middle
    bad = bytearray(good)
    bad[len(bad) // 2] ^= 0x40
    path.write_bytes(bytes(bad))
    with pytest.raises(pf.StateError, match=str(path)):
        cw.load(kind, str(path))
    # another object's checkpoint
    other = [k for k in OBJECTS if k.split("-")[0] != kind.split("-")[0]][0]
    path.write_bytes(_made(other).save())
    with pytest.raises(pf.StateError, match=str(path)):
        cw.load(kind, str(path))
    # the bound on the bytes read
    path.write_bytes(good)
    loader = {"stepper": lambda p, **kw: pf.Stepper.load_file(p, cw._rhs, **kw)}.get(
        kind, type(obj).load_file
    )
    assert loader(str(path), max_size=len(good)).save() == good
    with pytest.raises(pf.StateError, match=f"longer than max_size={len(good) - 1}"):
        loader(str(path), max_size=len(good) - 1)
    # not a regular file
    with pytest.raises(pf.FileError, match="not a regular file"):
        loader("/dev/null")


def test_bad_paths_and_max_size(tmp_path):
    s = pf.Stream.integral(0.5, 0.1)
    with pytest.raises(pf.InputTypeError, match="path=None"):
        s.save_file(None)
    with pytest.raises(pf.InputTypeError, match="path=3"):
        pf.Stream.load_file(3)
    with pytest.raises(pf.ArgumentError, match="empty"):
        s.save_file("")
    with pytest.raises(pf.ArgumentError, match="NUL"):
        s.save_file("a\0b")
    with pytest.raises(pf.InputTypeError, match="max_size"):
        pf.Stream.load_file(str(tmp_path / "x"), max_size=1.5)
    with pytest.raises(pf.ArgumentError, match="max_size=-1"):
        pf.Controller.load_file(str(tmp_path / "x"), max_size=-1)
    assert os.listdir(tmp_path) == []


def test_c_and_python_read_each_others_files(tmp_path):
    # the C library's fc_*_save_file / fc_*_load_file write and read the
    # bytes of fc_*_save (csrc/fracconv.h); Python's load_file reads them
    for kind in OBJECTS:
        obj = _made(kind)
        path = str(tmp_path / f"{kind}.c.ckpt").encode()
        if kind.startswith("stream"):
            assert lib.fc_stream_save_file(obj._s, path) == 0
            loader = pf.TimedStream if kind == "stream-timed" else pf.Stream
            back = loader.load_file(path)
            assert back.channels == 1  # explicit channels from a C file
            assert back.save()[8:] == obj.save()[8:]
            pp = ffi.new("fc_stream **")
            assert lib.fc_stream_load_file(path, 1 << 20, pp) == 0
            lib.fc_stream_free(pp[0])
        elif kind == "stepper":
            assert lib.fc_solver_save_file(obj._s, path) == 0
            back = pf.Stepper.load_file(path, cw._rhs)
            assert back.save()[8:] == obj.save()[8:]
            n = cw.position(obj)
            assert _bits(back.advance(cw.BLOCK)[1]) == _bits(obj.advance(cw.BLOCK)[1])
            assert n == back.steps - cw.BLOCK
        else:
            assert lib.fc_controller_save_file(obj._c, path) == 0
            back = pf.Controller.load_file(path)
            assert back.save() == obj.save()
            obj.save_file(path)
            pp = ffi.new("fc_controller **")
            assert lib.fc_controller_load_file(path, 1 << 20, pp) == 0
            lib.fc_controller_free(pp[0])
            assert lib.fc_controller_load_file(path, 10, pp) == lib.FC_ERR_SIZE
