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

.PHONY: all lib example solver-example bench-c check-c clean

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

# The solver example (tests/test_solver_c.py builds and runs it).
solver-example: $(BUILD)/solver_example
$(BUILD)/solver_example: examples/solver_example.c csrc/fracconv.h $(BUILD)/libfracconv.a
	$(CC) -O2 -std=c11 -Wall -Wextra -Icsrc $< $(BUILD)/libfracconv.a -lm -o $@

bench-c: $(BENCH_BINS)
$(BUILD)/%: bench/c/%.c csrc/fracconv.h $(BUILD)/libfracconv.a
	$(CC) -O2 -std=c11 -Wall -Wextra -Icsrc $< $(BUILD)/libfracconv.a -lm -o $@

check-c: example solver-example
	$(BUILD)/example
	$(BUILD)/solver_example

clean:
	rm -rf $(BUILD)

# C++17 wrapper (csrc/fracconv.hpp, header-only) and its example program.
CXX ?= c++
.PHONY: cpp-example
cpp-example: $(BUILD)/example_cpp
$(BUILD)/example_cpp: examples/example.cpp csrc/fracconv.hpp csrc/fracconv.h $(BUILD)/libfracconv.a
	$(CXX) -O2 -std=c++17 -Wall -Wextra -Werror -Icsrc $< $(BUILD)/libfracconv.a -lm -o $@

# Fortran 2008 module (fortran/fracconv.f90) and its example program.
FC = gfortran
# -Wno-compare-reals: the example compares bit for bit on purpose
FFLAGS = -O2 -std=f2008 -Wall -Wextra -Werror -Wno-compare-reals
.PHONY: fortran-example
fortran-example: $(BUILD)/example_f90
$(BUILD)/example_f90: fortran/fracconv.f90 examples/example.f90 $(BUILD)/libfracconv.a
	@mkdir -p $(BUILD)/fmod
	$(FC) $(FFLAGS) -J $(BUILD)/fmod fortran/fracconv.f90 examples/example.f90 $(BUILD)/libfracconv.a -lm -o $@
