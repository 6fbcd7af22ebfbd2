/*
 * file.c -- checkpoint files: the one atomic file writer and the one
 * bounded file reader of the library, and the save-to-file / load-from-file
 * pair of every object with state (streams, solvers, controllers), which
 * are the object's own save/load functions around them.
 *
 * The atomic write is the usual POSIX sequence (write a temporary file in
 * the target's directory, fsync it, rename it over the target, fsync the
 * directory): rename(2) replaces the target atomically (POSIX.1-2008,
 * "rename"), so a reader sees the old file or the new one and never a
 * mixture, and the two fsync calls make the new contents and the new
 * directory entry durable before the call returns (fsync(2); the directory
 * sync is what makes the rename itself survive a crash of the machine, see
 * Pillai et al., "All File Systems Are Not Created Equal", OSDI 2014).
 * Plain write(2) is used: there is no user-space buffer to flush.
 *
 * POSIX only (open, write, fsync, rename, mkstemp); no printing, no exit.
 */
#define _POSIX_C_SOURCE 200809L

#include <errno.h>
#include <fcntl.h>
#include <stdio.h>   /* rename only: the library never prints */
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <sys/types.h>
#include <unistd.h>

#include "fracconv.h"

/* The suffix of the temporary file; mkstemp replaces the six X. */
static const char tmp_suffix[] = ".tmp-XXXXXX";

/* Largest single write/read request (Linux caps one call near 2^31). */
#define CHUNK ((size_t)1 << 30)

static int write_all(int fd, const unsigned char *p, size_t n)
{
    while (n > 0) {
        size_t want = n < CHUNK ? n : CHUNK;
        ssize_t w = write(fd, p, want);
        if (w < 0) {
            if (errno == EINTR) continue;
            return -1;
        }
        if (w == 0) {          /* no progress and no error: treat as I/O error */
            errno = EIO;
            return -1;
        }
        p += (size_t)w;
        n -= (size_t)w;
    }
    return 0;
}

/* The directory that holds path[0 .. len), as a new string ("." for a
   bare name, "/" for a file at the root), or NULL (out of memory). */
static char *dir_of(const char *path, size_t len)
{
    size_t cut = len;
    while (cut > 0 && path[cut - 1] != '/') cut--;
    const char *src = cut == 0 ? "." : path;
    size_t dlen = cut == 0 ? 1 : (cut > 1 ? cut - 1 : 1);
    char *dir = malloc(dlen + 1);
    if (dir == NULL) return NULL;
    memcpy(dir, src, dlen);
    dir[dlen] = '\0';
    return dir;
}

/* fsync a directory. A file system that cannot sync a directory (EINVAL)
   is taken as having nothing to sync. Returns 0 or an errno value. */
static int sync_dir(const char *dir)
{
    int fd = open(dir, O_RDONLY | O_DIRECTORY | O_CLOEXEC);
    int err = 0;
    if (fd < 0) return errno;
    if (fsync(fd) != 0 && errno != EINVAL) err = errno;
    close(fd);
    return err;
}

int fc_file_write(const char *path, const unsigned char *data, size_t size)
{
    if (path == NULL || (data == NULL && size > 0)) return FC_ERR_NULL;
    size_t len = strlen(path);
    if (len == 0 || path[len - 1] == '/') return FC_ERR_ARG;
    if (len > (size_t)-1 - sizeof tmp_suffix) return FC_ERR_SIZE;
    /* both names first: nothing can fail for want of memory once the
       target has been replaced */
    char *tmp = malloc(len + sizeof tmp_suffix);
    char *dir = dir_of(path, len);
    if (tmp == NULL || dir == NULL) {
        free(tmp);
        free(dir);
        return FC_ERR_NOMEM;
    }
    memcpy(tmp, path, len);
    memcpy(tmp + len, tmp_suffix, sizeof tmp_suffix);

    int err = 0;
    int fd = mkstemp(tmp);
    if (fd < 0) {
        err = errno;
    } else {
        struct stat old;
        /* not inherited by programs this process starts (best effort) */
        (void)fcntl(fd, F_SETFD, FD_CLOEXEC);
        /* a replaced file keeps its permission bits; a new one keeps
           mkstemp's 0600 */
        if (stat(path, &old) == 0 && S_ISREG(old.st_mode) &&
            fchmod(fd, old.st_mode & 07777) != 0)
            err = errno;
        if (err == 0 && (write_all(fd, data, size) != 0 || fsync(fd) != 0)) err = errno;
        if (close(fd) != 0 && err == 0) err = errno;
        if (err == 0 && rename(tmp, path) != 0) err = errno;
        if (err) unlink(tmp);  /* the target was not touched */
    }
    /* the new file is in place: make the rename durable */
    if (err == 0) err = sync_dir(dir);
    free(tmp);
    free(dir);
    if (err) {
        errno = err;
        return FC_ERR_IO;
    }
    return FC_OK;
}

int fc_file_read(const char *path, size_t max_size, unsigned char **data,
                 size_t *size)
{
    if (path == NULL || data == NULL || size == NULL) return FC_ERR_NULL;
    if (path[0] == '\0') return FC_ERR_ARG;
    /* O_NONBLOCK: opening a FIFO must not wait for a writer; it has no
       effect on reading a regular file */
    int fd = open(path, O_RDONLY | O_NONBLOCK | O_CLOEXEC);
    if (fd < 0) return FC_ERR_IO;
    struct stat st;
    int err = 0, status = FC_OK;
    unsigned char *buf = NULL;
    size_t used = 0, cap = 0;
    /* read at most max_size + 1 bytes: one more than allowed tells a file
       that is too long, whatever fstat said (the file may grow) */
    size_t limit = max_size < (size_t)-1 ? max_size + 1 : max_size;
    if (fstat(fd, &st) != 0) {
        err = errno;
        goto done;
    }
    if (!S_ISREG(st.st_mode)) {
        err = S_ISDIR(st.st_mode) ? EISDIR : EINVAL;
        goto done;
    }
    if (st.st_size > 0 && (uintmax_t)st.st_size > (uintmax_t)max_size) {
        status = FC_ERR_SIZE;  /* too long already: nothing read */
        goto done;
    }
    cap = 4096;
    if (st.st_size > 0 && (uintmax_t)st.st_size < (uintmax_t)limit)
        cap = (size_t)st.st_size + 1;      /* + 1: see the end without a realloc */
    if (cap > limit) cap = limit;
    if (cap == 0) cap = 1;
    buf = malloc(cap);
    if (buf == NULL) {
        status = FC_ERR_NOMEM;
        goto done;
    }
    for (;;) {
        if (used == cap) {
            if (cap >= limit) break;
            size_t ncap = cap <= limit / 2 ? 2 * cap : limit;
            unsigned char *nb = realloc(buf, ncap);
            if (nb == NULL) {
                status = FC_ERR_NOMEM;
                goto done;
            }
            buf = nb;
            cap = ncap;
        }
        size_t want = cap - used < CHUNK ? cap - used : CHUNK;
        ssize_t r = read(fd, buf + used, want);
        if (r < 0) {
            if (errno == EINTR) continue;
            err = errno;
            goto done;
        }
        if (r == 0) break;
        used += (size_t)r;
    }
    if (used > max_size) status = FC_ERR_SIZE;
done:
    close(fd);
    if (err) status = FC_ERR_IO;
    if (status != FC_OK) {
        free(buf);
        if (err) errno = err;
        return status;
    }
    *data = buf;
    *size = used;
    return FC_OK;
}

void fc_file_data_free(unsigned char *data)
{
    free(data);
}

/* ------------------------------------------------------------ per object */

/* Write buf (from the object's save) atomically, keeping errno of a file
   error past the free. */
static int write_and_free(const char *path, unsigned char *buf, size_t n)
{
    int st = fc_file_write(path, buf, n);
    int err = errno;
    free(buf);
    errno = err;
    return st;
}

int fc_stream_save_file(fc_stream *s, const char *path)
{
    size_t n, w;
    if (s == NULL || path == NULL) return FC_ERR_NULL;
    int st = fc_stream_save_size(s, &n);
    if (st) return st;
    unsigned char *buf = malloc(n ? n : 1);
    if (buf == NULL) return FC_ERR_NOMEM;
    st = fc_stream_save(s, buf, n, &w);
    if (st) {
        free(buf);
        return st;
    }
    return write_and_free(path, buf, w);
}

int fc_solver_save_file(const fc_solver *s, const char *path)
{
    size_t n, w;
    if (s == NULL || path == NULL) return FC_ERR_NULL;
    int st = fc_solver_save_size(s, &n);
    if (st) return st;
    unsigned char *buf = malloc(n ? n : 1);
    if (buf == NULL) return FC_ERR_NOMEM;
    st = fc_solver_save(s, buf, n, &w);
    if (st) {
        free(buf);
        return st;
    }
    return write_and_free(path, buf, w);
}

int fc_controller_save_file(const fc_controller *c, const char *path)
{
    size_t n, w;
    if (c == NULL || path == NULL) return FC_ERR_NULL;
    int st = fc_controller_save_size(c, &n);
    if (st) return st;
    unsigned char *buf = malloc(n ? n : 1);
    if (buf == NULL) return FC_ERR_NOMEM;
    st = fc_controller_save(c, buf, n, &w);
    if (st) {
        free(buf);
        return st;
    }
    return write_and_free(path, buf, w);
}

int fc_stream_load_file(const char *path, size_t max_size, fc_stream **out)
{
    unsigned char *buf;
    size_t n;
    if (path == NULL || out == NULL) return FC_ERR_NULL;
    int st = fc_file_read(path, max_size, &buf, &n);
    if (st) return st;
    st = fc_stream_load(buf, n, out);
    free(buf);
    return st;
}

int fc_solver_load_file(const char *path, size_t max_size, fc_solver **out)
{
    unsigned char *buf;
    size_t n;
    if (path == NULL || out == NULL) return FC_ERR_NULL;
    int st = fc_file_read(path, max_size, &buf, &n);
    if (st) return st;
    st = fc_solver_load(buf, n, out);
    free(buf);
    return st;
}

int fc_controller_load_file(const char *path, size_t max_size, fc_controller **out)
{
    unsigned char *buf;
    size_t n;
    if (path == NULL || out == NULL) return FC_ERR_NULL;
    int st = fc_file_read(path, max_size, &buf, &n);
    if (st) return st;
    st = fc_controller_load(buf, n, out);
    free(buf);
    return st;
}
