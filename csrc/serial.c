/*
 * serial.c -- the checksum and the bounded reader of serial.h.
 */
#include "serial.h"

uint64_t fc__fnv1a(uint64_t h, const unsigned char *p, size_t n)
{
    for (size_t i = 0; i < n; i++) {
        h ^= p[i];
        h *= FC__FNV_PRIME;
    }
    return h;
}

void fc__rd_init(fc__rd *r, const unsigned char *buf, size_t size)
{
    r->buf = buf;
    r->size = size;
    r->pos = 0;
    r->bad = 0;
}

const unsigned char *fc__rd_bytes(fc__rd *r, size_t n)
{
    if (r->bad || n > r->size - r->pos) {
        r->bad = 1;
        return NULL;
    }
    const unsigned char *p = r->buf + r->pos;
    r->pos += n;
    return p;
}

uint32_t fc__rd_u32(fc__rd *r)
{
    const unsigned char *p = fc__rd_bytes(r, 4);
    return p ? fc__get32(p) : 0;
}

uint64_t fc__rd_u64(fc__rd *r)
{
    const unsigned char *p = fc__rd_bytes(r, 8);
    return p ? fc__get64(p) : 0;
}

double fc__rd_d(fc__rd *r)
{
    const unsigned char *p = fc__rd_bytes(r, 8);
    return p ? fc__getd(p) : 0.0;
}
