/*
 * fixsum.h -- checksum fix-ups for the fuzz targets (tests/fuzz/).
 *
 * A saved blob carries FNV-1a 64 checksums (csrc/serial.h): the stream's
 * over its header and payload, a compressed stream's payload its own, the
 * solver's and the controller's over everything before them, with the
 * streams they embed checksummed inside. A mutated blob almost never
 * passes them, so a fuzzer that feeds bytes straight into a loader
 * exercises little beyond the checksum test. These functions rewrite every
 * checksum of a (possibly mutated) blob after the mutation, innermost
 * first, so that the loader's field checks see the mutated fields. They
 * walk the layouts the loaders read (csrc/stream.c, stream_compressed.c,
 * solver.c, controller.c) and stop, leaving the rest alone, wherever a
 * length field points outside the buffer. Only the checksum function
 * itself is taken from the library (fc__fnv1a, serial.h).
 */
#ifndef FC_FUZZ_FIXSUM_H
#define FC_FUZZ_FIXSUM_H

#include <stddef.h>
#include <stdint.h>
#include <string.h>
#include "serial.h"

/* the controller format's own checksum basis (csrc/controller.c) */
#define FIX_CTRL_BASIS UINT64_C(1469598103934665603)

/* A stream blob b[0 .. n): the compressed or timed payload's checksum
   (when the payload starts with its magic "FCCS" or "FCTS"), then the common header's over
   bytes [0, 72) and the payload [80, n). */
static inline void fix_stream(unsigned char *b, size_t n)
{
    if (n < 80) return;
    unsigned char *q = b + 80;
    size_t p = n - 80;
    if (p >= 80 && (memcmp(q, "FCCS", 4) == 0 || memcmp(q, "FCTS", 4) == 0))
        fc__put64(q + p - 8, fc__fnv1a(FC__FNV_OFFSET, q, p - 8));
    fc__put64(b + 64, (uint64_t)p);   /* the payload size the header states */
    uint64_t h = fc__fnv1a(FC__FNV_OFFSET, b, 72);
    fc__put64(b + 72, fc__fnv1a(h, q, p));
}

/* A solver blob: the embedded streams, then the trailing checksum. */
static inline void fix_solver(unsigned char *b, size_t n)
{
    if (n < 112 + 16) return;
    uint32_t K = fc__get32(b + 20);
    uint64_t m = fc__get64(b + 24);
    size_t end = n - 8;
    if (K <= 2 && m > 0 && m <= (end - 112) / 32) {
        size_t off = 112 + 8 * (size_t)m * (2 + K);
        if (off + 8 <= end) {
            uint64_t ng = fc__get64(b + off);
            off += 8;
            for (uint64_t j = 0; j < 2 * ng && off + 8 <= end; j++) {
                uint64_t len = fc__get64(b + off);
                off += 8;
                if (len > end - off) break;
                fix_stream(b + off, (size_t)len);
                off += (size_t)len;
            }
        }
    }
    fc__put64(b + end, fc__fnv1a(FC__FNV_OFFSET, b, end));
}

/* A controller blob: the two embedded streams, then the trailing checksum
   (with the format's own basis). */
static inline void fix_controller(unsigned char *b, size_t n)
{
    const size_t fixed = 16 + 8 * 24 + 4 * 8 + 8;
    if (n < fixed + 24) return;
    size_t end = n - 8, off = fixed;
    for (int k = 0; k < 2 && off + 8 <= end; k++) {
        uint64_t len = fc__get64(b + off);
        off += 8;
        if (len > end - off) break;
        fix_stream(b + off, (size_t)len);
        off += (size_t)len;
    }
    fc__put64(b + end, fc__fnv1a(FIX_CTRL_BASIS, b, end));
}

#endif
