# Builds the C library for compiled callers: build/libfracconv.so,
# build/libfracconv.a, the example program and the C benchmarks.
CC ?= cc
# FC_OPT_CFLAGS and FC_STD_CFLAGS, shared with setup_build.py (the extension)
include csrc/flags.mk
CFLAGS ?= $(FC_OPT_CFLAGS)
ALL_CFLAGS = $(CFLAGS) $(FC_STD_CFLAGS) -fPIC -Icsrc
BUILD = build
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

$(BUILD)/libfracconv.so: $(OBJS)
	$(CC) -shared -o $@ $(OBJS) -lm

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
