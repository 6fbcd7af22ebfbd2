"""A preview followed by the push of the same sample (csrc/stream_compressed.c).

A one-channel compressed stream keeps the states its last preview computed
and takes them when the next push is of that very sample at that very
count (a controller previews, decides, then pushes). The reference is the
stream's own defining property (docs/design.md, section 2.6: a preview
equals the push bit for bit, and the outputs depend only on the samples
pushed): a second stream that only ever receives the pushes must give
the same outputs and the same saved state, bit for bit, whatever previews,
histories, resets and save/load round trips the first one saw.
"""

import numpy as np
import pytest

from pyfracconv import Stream

CASES = [
    ("rectangle", 0.6),
    ("trapezoid", 0.4),
    ("grunwald", 0.5),
    ("l1", 0.7),
    ("rectangle", 1.4),
    ("trapezoid", 1.3),
]


def _make(rule, order):
    make = Stream.integral if rule in ("rectangle", "trapezoid") else Stream.derivative
    return make(order, 0.01, rule=rule, mode="compressed", tol=1e-10, horizon=1e5)


def _bits(v):
    return np.asarray(v, dtype=np.float64).view(np.int64)


@pytest.mark.parametrize("rule, order", CASES)
def test_previews_never_change_what_pushes_give(rule, order):
    rng = np.random.default_rng(7)
    a, ref = _make(rule, order), _make(rule, order)
    for step in range(400):  # past the band of 64 lags
        x = float(rng.choice([rng.standard_normal(), 0.0, -0.0, 1e-300, 3.0]))
        kind = rng.integers(0, 6)
        if kind == 0:  # preview the sample, push it
            p = a.preview(x)
            assert _bits(p) == _bits(a.push(x))
            assert _bits(ref.push(x)) == _bits(p)
            continue
        if kind == 1:  # preview another sample first
            a.preview(x + 1.0)
        elif kind == 2:  # preview -0.0, push +0.0 (other bits)
            a.preview(-x if x == 0.0 else x * 0.5)
        elif kind == 3:
            a.history()
        elif kind == 4 and step % 50 == 7:  # reset both, a with a preview pending
            a.preview(x)
            a.reset()
            ref.reset()
        elif kind == 5 and step % 40 == 3:  # a round trip with a preview pending
            a.preview(x)
            a = Stream.load(a.save())
        assert _bits(a.push(x)) == _bits(ref.push(x)), (step, kind)
        assert a.save() == ref.save(), step
    assert a.count == ref.count


def test_preview_then_push_many_of_one_and_of_more():
    a, ref = _make("trapezoid", 0.4), _make("trapezoid", 0.4)
    x = np.random.default_rng(3).standard_normal(300)
    for i in range(0, 300, 3):
        a.preview(x[i])
        got = a.push_many(x[i : i + 1])  # a block of one: the previewed sample
        a.preview(x[i + 1])
        got2 = a.push_many(x[i + 1 : i + 3])  # a block of two: computed as pushes
        assert np.array_equal(_bits(np.concatenate([got, got2])), _bits(ref.push_many(x[i : i + 3])))
    assert a.save() == ref.save()


def test_multichannel_previews_as_before():
    a = Stream.integral(0.5, 0.01, mode="compressed", channels=3, horizon=1e4)
    ref = Stream.integral(0.5, 0.01, mode="compressed", channels=3, horizon=1e4)
    x = np.random.default_rng(5).standard_normal((200, 3))
    for row in x:
        p = a.preview(row)
        assert np.array_equal(_bits(p), _bits(a.push(row)))
        ref.push(row)
    assert a.save() == ref.save()
