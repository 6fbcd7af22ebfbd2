# Builds the C library for compiled callers: build/libfracconv.so (a
# versioned shared object), build/libfracconv.a, the example program and
# the C benchmarks. make BUILD=dir builds into dir instead of build/ (the
# pip install uses its own build/ subfolders, which never clash with the
# files made here).
CC ?= cc
# FC_OPT_CFLAGS and FC_STD_CFLAGS, shared with setup_build.py (the extension)
include csrc/flags.mk
CFLAGS ?= $(FC_OPT_CFLAGS)
# -fvisibility=hidden: only the functions fracconv.h marks FC_API are
# exported from the shared object (nm -D lists fc_ names only).
ALL_CFLAGS = $(CFLAGS) $(FC_STD_CFLAGS) -fPIC -fvisibility=hidden -Icsrc
BUILD = build
# The shared object's version: the SONAME carries the major number (the
# ABI), the file name the full version, both read from fracconv.h.
VMAJOR := $(shell sed -n 's/^\#define FC_VERSION_MAJOR \([0-9]*\).*/\1/p' csrc/fracconv.h)
VMINOR := $(shell sed -n 's/^\#define FC_VERSION_MINOR \([0-9]*\).*/\1/p' csrc/fracconv.h)
VPATCH := $(shell sed -n 's/^\#define FC_VERSION_PATCH \([0-9]*\).*/\1/p' csrc/fracconv.h)
SONAME = libfracconv.so.$(VMAJOR)
SOFILE = libfracconv.so.$(VMAJOR).$(VMINOR).$(VPATCH)
SRCS = $(sort $(wildcard csrc/*.c))
OBJS = $(patsubst csrc/%.c,$(BUILD)/obj/%.o,$(SRCS))
HDRS = $(wildcard csrc/*.h)
BENCH_SRCS = $(wildcard bench/c/*.c)
BENCH_BINS = $(patsubst bench/c/%.c,$(BUILD)/%,$(BENCH_SRCS))

.PHONY: all lib example bench-c check-c clean

all: lib example

lib: $(BUILD)/libfracconv.so $(BUILD)/libfracconv.a

$(BUILD)/obj/%.o: csrc/%.c $(HDRS) csrc/flags.mk
	@mkdir -p $(BUILD)/obj
	$(CC) $(ALL_CFLAGS) -c $< -o $@

# libfracconv.so -> libfracconv.so.MAJOR -> libfracconv.so.MAJOR.MINOR.PATCH
$(BUILD)/$(SOFILE): $(OBJS)
	$(CC) -shared -Wl,-soname,$(SONAME) -o $@ $(OBJS) -lm

$(BUILD)/libfracconv.so: $(BUILD)/$(SOFILE)
	ln -sf $(SOFILE) $(BUILD)/$(SONAME)
	ln -sf $(SONAME) $@

$(BUILD)/libfracconv.a: $(OBJS)
	rm -f $@
	ar rcs $@ $(OBJS)

# The example links the static library, so it runs without LD_LIBRARY_PATH.
example: $(BUILD)/example
$(BUILD)/example: examples/example.c csrc/fracconv.h $(BUILD)/libfracconv.a
	$(CC) -O2 -std=c11 -Wall -Wextra -Icsrc $< $(BUILD)/libfracconv.a -lm -o $@

bench-c: $(BENCH_BINS)
$(BUILD)/%: bench/c/%.c csrc/fracconv.h $(BUILD)/libfracconv.a
	$(CC) -O2 -std=c11 -Wall -Wextra -Icsrc $< $(BUILD)/libfracconv.a -lm -o $@

check-c: example
	$(BUILD)/example

clean:
	rm -rf $(BUILD)
