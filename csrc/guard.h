/*
 * guard.h -- the busy guard of every object with state (private): streams
 * (stream.c), solvers (solver.c) and controllers (controller.c).
 *
 * A lock-free atomic flag (C11 atomic_flag, the one type the standard
 * requires to be lock-free). A call takes it with fc__guard_enter, which
 * never waits: if another call holds it (another thread, or a callback of
 * the same object re-entering it), it returns FC_ERR_BUSY and the caller
 * returns that status with nothing changed; otherwise the call runs and
 * gives it back with fc__guard_leave. Acquire/release ordering makes what
 * one holder wrote visible to the next. The flag is the one field written
 * through a const object pointer (fracconv.h, "const"): the objects are
 * always allocated by the library, never const objects.
 */
#ifndef FC_GUARD_H
#define FC_GUARD_H

#include <stdatomic.h>
#include "fracconv.h"

typedef atomic_flag fc__guard;

/* A fresh guard is free. */
static inline void fc__guard_init(fc__guard *g)
{
    atomic_flag_clear(g);
}

/* FC_OK (taken) or FC_ERR_BUSY (held by another call). */
static inline int fc__guard_enter(const fc__guard *cg)
{
    fc__guard *g = (fc__guard *)cg;
    if (atomic_flag_test_and_set_explicit(g, memory_order_acquire))
        return FC_ERR_BUSY;
    return FC_OK;
}

static inline void fc__guard_leave(const fc__guard *cg)
{
    fc__guard *g = (fc__guard *)cg;
    atomic_flag_clear_explicit(g, memory_order_release);
}

/* NULL check and guard in one, for a function whose object is `obj` with
   its guard in field `busy`. */
#define FC__ENTER_OR_RETURN(obj)                         \
    do {                                                 \
        if (!(obj)) return FC_ERR_NULL;                  \
        int st_e_ = fc__guard_enter(&(obj)->busy);       \
        if (st_e_ != FC_OK) return st_e_;                \
    } while (0)

#endif
