"""The stream facade's promises shared by both modes, through the C API:
in-place pushes (y == x), refused partial overlaps, and the horizon
refusal of preview and history.

The values compared are the library's own outputs on separate buffers (the
in-place call must give the same bits), so no outside reference is needed
here; the accuracy of those outputs is checked in test_promises_exact.py and
test_promises_compressed.py against tests/reference.py.
"""

from __future__ import annotations

import numpy as np
import pytest

from pyfracconv._fracconv import ffi, lib

RULES = [lib.FC_RULE_RECTANGLE, lib.FC_RULE_TRAPEZOID, lib.FC_RULE_GRUNWALD, lib.FC_RULE_L1]


def create(rule, mode, channels=2, horizon=500.0):
    out = ffi.new("fc_stream **")
    st = lib.fc_stream_create(rule, 0.5, 0.1, channels, mode, 1e-10, horizon, out)
    assert st == lib.FC_OK
    return ffi.gc(out[0], lib.fc_stream_free)


def save(s):
    size = ffi.new("size_t *")
    assert lib.fc_stream_save_size(s, size) == lib.FC_OK
    buf = ffi.new("unsigned char[]", size[0])
    written = ffi.new("size_t *")
    assert lib.fc_stream_save(s, buf, size[0], written) == lib.FC_OK
    return bytes(ffi.buffer(buf, written[0]))


def push_block(s, x, y):
    return lib.fc_stream_push_block(
        s, ffi.from_buffer("double[]", x), x.shape[0], ffi.from_buffer("double[]", y)
    )


@pytest.mark.parametrize("mode", [lib.FC_MODE_EXACT, lib.FC_MODE_COMPRESSED])
@pytest.mark.parametrize("rule", RULES)
def test_in_place_block_equals_separate_buffers(rule, mode):
    x = np.random.default_rng(7).standard_normal((300, 2))
    a, b = create(rule, mode), create(rule, mode)
    y = np.empty_like(x)
    assert push_block(a, x, y) == lib.FC_OK
    z = x.copy()
    assert push_block(b, z, z) == lib.FC_OK  # y is x
    assert np.array_equal(y, z)
    assert save(a) == save(b)


@pytest.mark.parametrize("mode", [lib.FC_MODE_EXACT, lib.FC_MODE_COMPRESSED])
def test_partial_overlap_is_refused_and_changes_nothing(mode):
    s = create(lib.FC_RULE_L1, mode)
    push_block(s, np.ones((10, 2)), np.empty((10, 2)))
    before = save(s)
    buf = np.arange(42, dtype=float)
    x = np.frombuffer(buf, count=40)  # buf[0:40]
    y = np.frombuffer(buf, count=40, offset=8)  # buf[1:41]
    st = lib.fc_stream_push_block(s, ffi.from_buffer("double[]", x), 20, ffi.from_buffer("double[]", y))
    assert st == lib.FC_ERR_ARG
    assert save(s) == before
    assert np.array_equal(buf, np.arange(42, dtype=float))
    st = lib.fc_stream_preview(s, ffi.from_buffer("double[]", x), ffi.from_buffer("double[]", y))
    assert st == lib.FC_ERR_ARG


def test_preview_and_history_refuse_past_the_horizon():
    s = create(lib.FC_RULE_RECTANGLE, lib.FC_MODE_COMPRESSED, channels=1, horizon=100.0)
    x = np.ones((101, 1))
    assert push_block(s, x, np.empty_like(x)) == lib.FC_OK  # outputs 0 .. 100
    h = ffi.new("double[1]", [-7.0])
    v = ffi.new("double[1]", [1.0])
    before = save(s)
    assert lib.fc_stream_history(s, h) == lib.FC_ERR_HORIZON
    assert lib.fc_stream_preview(s, v, h) == lib.FC_ERR_HORIZON
    assert h[0] == -7.0 and save(s) == before
    assert lib.fc_stream_set_horizon_policy(s, lib.FC_HORIZON_CONTINUE) == lib.FC_OK
    assert lib.fc_stream_history(s, h) == lib.FC_OK
    assert lib.fc_stream_preview(s, v, h) == lib.FC_OK
