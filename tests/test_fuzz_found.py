"""Faults found by the fuzz targets (tests/fuzz/, README "Reliability"),
kept as ordinary tests through the public Python API. Each input is also
in tests/fuzz/found/, which `make fuzz-regress` runs with the corpus.
The expected behaviour is fracconv.h's: a loaded object behaves exactly
like the one that saved it.
"""

import numpy as np

import pyfracconv as pf


def test_implicit_rectangle_stepper_with_a_tiny_step_saves_a_state_that_loads():
    # fuzz_solver_fixsum found it (tests/fuzz/found/solver/implicit-rectangle-
    # tiny-step-reload.bin): with a subnormal step Newton's method accepts
    # its first iterate, so a step evaluates f once; the implicit rectangle
    # rule never evaluates f(t0) either, and the loader's bound "rhs calls
    # >= steps + 1" refused the solver's own saved state (StateError)
    def rhs(t, y):
        return -y

    st = pf.Stepper(rhs, 1.0, 0.6, 1.9e-319, method="implicit-rectangle", horizon=200)
    st.advance(2)
    assert st.rhs_evals == 2
    again = pf.Stepper.load(st.save(), rhs)
    t1, y1 = st.advance(5)
    t2, y2 = again.advance(5)
    assert np.array_equal(t1, t2) and np.array_equal(y1, y2)
    assert again.save() == st.save()
