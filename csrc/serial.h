/*
 * serial.h -- the one serializer of every saved object (private).
 *
 * Little-endian fixed-width fields (u32, u64, IEEE-754 double as its 64
 * bits) and the FNV-1a 64-bit checksum (Fowler, Noll, Vo; parameters
 * offset basis 14695981039346656037, prime 1099511628211). The put/get
 * functions work on a buffer the caller has sized; the bounded reader
 * (fc__rd) refuses every read past the end of its buffer: the read gives
 * 0 and the reader's bad flag stays set, so a loader may read a whole
 * header and test the flag once.
 */
#ifndef FC_SERIAL_H
#define FC_SERIAL_H

#include <stddef.h>
#include <stdint.h>
#include <string.h>

#define FC__FNV_OFFSET UINT64_C(0xcbf29ce484222325)
#define FC__FNV_PRIME UINT64_C(0x100000001b3)

static inline void fc__put32(unsigned char *p, uint32_t v)
{
    for (int i = 0; i < 4; i++) p[i] = (unsigned char)(v >> (8 * i));
}
static inline void fc__put64(unsigned char *p, uint64_t v)
{
    for (int i = 0; i < 8; i++) p[i] = (unsigned char)(v >> (8 * i));
}
static inline void fc__putd(unsigned char *p, double d)
{
    uint64_t v;
    memcpy(&v, &d, 8);
    fc__put64(p, v);
}
static inline uint32_t fc__get32(const unsigned char *p)
{
    return (uint32_t)p[0] | (uint32_t)p[1] << 8 | (uint32_t)p[2] << 16 |
           (uint32_t)p[3] << 24;
}
static inline uint64_t fc__get64(const unsigned char *p)
{
    uint64_t v = 0;
    for (int i = 7; i >= 0; i--) v = (v << 8) | p[i];
    return v;
}
static inline double fc__getd(const unsigned char *p)
{
    uint64_t v = fc__get64(p);
    double d;
    memcpy(&d, &v, 8);
    return d;
}

/* FNV-1a 64 of p[0 .. n) continuing from h (FC__FNV_OFFSET to start). */
uint64_t fc__fnv1a(uint64_t h, const unsigned char *p, size_t n);

/* Bounded reader over buf[0 .. size). */
typedef struct {
    const unsigned char *buf;
    size_t size, pos;
    int bad;               /* set by the first read past the end */
} fc__rd;

void fc__rd_init(fc__rd *r, const unsigned char *buf, size_t size);
uint32_t fc__rd_u32(fc__rd *r);
uint64_t fc__rd_u64(fc__rd *r);
double fc__rd_d(fc__rd *r);
/* A pointer to the next n bytes (and skips them), or NULL past the end. */
const unsigned char *fc__rd_bytes(fc__rd *r, size_t n);

#endif
