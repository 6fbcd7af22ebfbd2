# Builds the C library for compiled callers: cbuild/libfracconv.so (a
# versioned shared object), cbuild/libfracconv.a, the example programs and
# the C benchmarks; make install PREFIX=... [DESTDIR=...] installs them.
# make BUILD=dir builds into dir instead of cbuild/. setuptools (pip
# install) keeps its own tree, build/, which make never touches: make
# clean removes cbuild/ only.
CC ?= cc
# FC_OPT_CFLAGS and FC_STD_CFLAGS, shared with setup_build.py (the extension)
include csrc/flags.mk
CFLAGS ?= $(FC_OPT_CFLAGS)
# -fvisibility=hidden: only the functions fracconv.h marks FC_API are
# exported from the shared object (nm -D lists fc_ names only).
ALL_CFLAGS = $(CFLAGS) $(FC_STD_CFLAGS) $(FC_THREAD_FLAGS) -fPIC -fvisibility=hidden -Icsrc
# the libraries a program linking libfracconv.a adds
LIBS = -lm $(FC_THREAD_FLAGS)
BUILD = cbuild
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

.PHONY: all lib example solver-example bench-c check-c clean install uninstall fortran-mod

all: lib example

lib: $(BUILD)/libfracconv.so $(BUILD)/libfracconv.a

$(BUILD)/obj/%.o: csrc/%.c $(HDRS) csrc/flags.mk
	@mkdir -p $(BUILD)/obj
	$(CC) $(ALL_CFLAGS) -c $< -o $@

# libfracconv.so -> libfracconv.so.MAJOR -> libfracconv.so.MAJOR.MINOR.PATCH
$(BUILD)/$(SOFILE): $(OBJS)
	$(CC) -shared -Wl,-soname,$(SONAME) -o $@ $(OBJS) $(LIBS)

$(BUILD)/libfracconv.so: $(BUILD)/$(SOFILE)
	ln -sf $(SOFILE) $(BUILD)/$(SONAME)
	ln -sf $(SONAME) $@

$(BUILD)/libfracconv.a: $(OBJS)
	rm -f $@
	ar rcs $@ $(OBJS)

# The example links the static library, so it runs without LD_LIBRARY_PATH.
example: $(BUILD)/example
$(BUILD)/example: examples/example.c csrc/fracconv.h $(BUILD)/libfracconv.a
	$(CC) -O2 -std=c11 -Wall -Wextra -Icsrc $< $(BUILD)/libfracconv.a $(LIBS) -o $@

# The solver example (tests/test_solver_c.py builds and runs it).
solver-example: $(BUILD)/solver_example
$(BUILD)/solver_example: examples/solver_example.c csrc/fracconv.h $(BUILD)/libfracconv.a
	$(CC) -O2 -std=c11 -Wall -Wextra -Icsrc $< $(BUILD)/libfracconv.a $(LIBS) -o $@

bench-c: $(BENCH_BINS)
$(BUILD)/%: bench/c/%.c csrc/fracconv.h $(BUILD)/libfracconv.a
	$(CC) -O2 -std=c11 -Wall -Wextra -Icsrc $< $(BUILD)/libfracconv.a $(LIBS) -o $@

check-c: example solver-example
	$(BUILD)/example
	$(BUILD)/solver_example

clean:
	rm -rf $(BUILD)

# C++17 wrapper (csrc/fracconv.hpp, header-only) and its example program.
CXX ?= c++
.PHONY: cpp-example
cpp-example: $(BUILD)/example_cpp $(BUILD)/solver_controller_cpp
$(BUILD)/example_cpp: examples/example.cpp csrc/fracconv.hpp csrc/fracconv.h $(BUILD)/libfracconv.a
	$(CXX) -O2 -std=c++17 -Wall -Wextra -Werror -Icsrc $< $(BUILD)/libfracconv.a $(LIBS) -o $@
# the solver and the controller through the wrapper (tests/test_cpp.py)
$(BUILD)/solver_controller_cpp: examples/solver_controller.cpp csrc/fracconv.hpp csrc/fracconv.h $(BUILD)/libfracconv.a
	$(CXX) -O2 -std=c++17 -Wall -Wextra -Werror -Icsrc $< $(BUILD)/libfracconv.a $(LIBS) -o $@

# Fortran 2008 module (fortran/fracconv.f90) and its example program.
FC = gfortran
# -Wno-compare-reals: the example compares bit for bit on purpose
FFLAGS = -O2 -std=f2008 -Wall -Wextra -Werror -Wno-compare-reals
.PHONY: fortran-example
fortran-example: $(BUILD)/example_f90 $(BUILD)/solver_controller_f90
$(BUILD)/example_f90: fortran/fracconv.f90 examples/example.f90 $(BUILD)/libfracconv.a
	@mkdir -p $(BUILD)/fmod
	$(FC) $(FFLAGS) -J $(BUILD)/fmod fortran/fracconv.f90 examples/example.f90 $(BUILD)/libfracconv.a $(LIBS) -o $@
# the solver and the controller through the module (tests/test_fortran.py)
$(BUILD)/solver_controller_f90: fortran/fracconv.f90 examples/solver_controller.f90 $(BUILD)/libfracconv.a
	@mkdir -p $(BUILD)/fmod-sc
	$(FC) $(FFLAGS) -J $(BUILD)/fmod-sc fortran/fracconv.f90 examples/solver_controller.f90 $(BUILD)/libfracconv.a $(LIBS) -o $@

# ------------------------------------------------------------- install
# make install PREFIX=/usr/local [DESTDIR=/staging]: the headers
# (fracconv.h, fracconv.hpp), the Fortran module source fracconv.f90 (and
# fracconv.mod after make fortran-mod), the shared library with its SONAME
# links, the static library, pkg-config's fracconv.pc and CMake's
# fracconvConfig.cmake + fracconvConfigVersion.cmake. The generated files
# carry PREFIX (not DESTDIR): a staged tree works once moved to PREFIX.
PREFIX = /usr/local
INCLUDEDIR = $(PREFIX)/include
LIBDIR = $(PREFIX)/lib
PKGCONFIGDIR = $(LIBDIR)/pkgconfig
CMAKEDIR = $(LIBDIR)/cmake/fracconv
VERSION = $(VMAJOR).$(VMINOR).$(VPATCH)
INSTALL = install
# the target's pointer size, for the CMake version check
SIZEOF_VOID_P := $(shell $(CC) -dM -E - </dev/null 2>/dev/null | sed -n 's/^\#define __SIZEOF_POINTER__ //p')
PKG_FILES = $(BUILD)/pkg/fracconv.pc $(BUILD)/pkg/fracconvConfig.cmake $(BUILD)/pkg/fracconvConfigVersion.cmake
SUBST = sed -e 's|@PREFIX@|$(PREFIX)|g' -e 's|@INCLUDEDIR@|$(INCLUDEDIR)|g' \
	-e 's|@LIBDIR@|$(LIBDIR)|g' -e 's|@VERSION@|$(VERSION)|g' -e 's|@VMAJOR@|$(VMAJOR)|g' \
	-e 's|@SOFILE@|$(SOFILE)|g' -e 's|@SONAME@|$(SONAME)|g' -e 's|@SIZEOF_VOID_P@|$(SIZEOF_VOID_P)|g'

# always regenerated: PREFIX may differ from the last run
.PHONY: $(PKG_FILES)
$(PKG_FILES): $(BUILD)/pkg/%: packaging/%.in
	@mkdir -p $(BUILD)/pkg
	$(SUBST) $< > $@

# The Fortran module file alone (compiler-specific; installed when built).
fortran-mod: $(BUILD)/fmod/fracconv.mod
$(BUILD)/fmod/fracconv.mod: fortran/fracconv.f90
	@mkdir -p $(BUILD)/fmod
	$(FC) $(FFLAGS) -J $(BUILD)/fmod -c $< -o $(BUILD)/fmod/fracconv.o

install: lib $(PKG_FILES)
	$(INSTALL) -d $(DESTDIR)$(INCLUDEDIR) $(DESTDIR)$(LIBDIR) $(DESTDIR)$(PKGCONFIGDIR) $(DESTDIR)$(CMAKEDIR)
	$(INSTALL) -m 644 csrc/fracconv.h csrc/fracconv.hpp fortran/fracconv.f90 $(DESTDIR)$(INCLUDEDIR)/
	if [ -f $(BUILD)/fmod/fracconv.mod ]; then $(INSTALL) -m 644 $(BUILD)/fmod/fracconv.mod $(DESTDIR)$(INCLUDEDIR)/; fi
	$(INSTALL) -m 755 $(BUILD)/$(SOFILE) $(DESTDIR)$(LIBDIR)/$(SOFILE)
	ln -sf $(SOFILE) $(DESTDIR)$(LIBDIR)/$(SONAME)
	ln -sf $(SONAME) $(DESTDIR)$(LIBDIR)/libfracconv.so
	$(INSTALL) -m 644 $(BUILD)/libfracconv.a $(DESTDIR)$(LIBDIR)/
	$(INSTALL) -m 644 $(BUILD)/pkg/fracconv.pc $(DESTDIR)$(PKGCONFIGDIR)/
	$(INSTALL) -m 644 $(BUILD)/pkg/fracconvConfig.cmake $(BUILD)/pkg/fracconvConfigVersion.cmake $(DESTDIR)$(CMAKEDIR)/

# Removes what install put there (same PREFIX and DESTDIR), and the
# package's own folder if it is left empty.
uninstall:
	rm -f $(DESTDIR)$(INCLUDEDIR)/fracconv.h $(DESTDIR)$(INCLUDEDIR)/fracconv.hpp \
	      $(DESTDIR)$(INCLUDEDIR)/fracconv.f90 $(DESTDIR)$(INCLUDEDIR)/fracconv.mod \
	      $(DESTDIR)$(LIBDIR)/$(SOFILE) $(DESTDIR)$(LIBDIR)/$(SONAME) $(DESTDIR)$(LIBDIR)/libfracconv.so \
	      $(DESTDIR)$(LIBDIR)/libfracconv.a $(DESTDIR)$(PKGCONFIGDIR)/fracconv.pc \
	      $(DESTDIR)$(CMAKEDIR)/fracconvConfig.cmake $(DESTDIR)$(CMAKEDIR)/fracconvConfigVersion.cmake
	-rmdir $(DESTDIR)$(CMAKEDIR) 2>/dev/null

# ---------------------------------------------------------------------------
# Checks of the C library under other compilers, the portable build and the
# sanitizers (README, "Reliability"). Each builds the library from the same
# SRCS into its own folder under $(BUILD) and runs the example programs and
# the C tests of tests/c/ there; .ci/run runs them all.
#   check-c-tests   the C tests (API driver, threads, allocation failure)
#                   against this build
#   check-gcc       gcc, -Werror
#   check-clang     clang, -Werror
#   check-portable  -DFC_NO_SIMD (no AVX2 anywhere), -Werror; outputs
#                   compared with the default build (tests/c/simd_compare.c)
#   asan            AddressSanitizer + UndefinedBehaviorSanitizer (+ leaks)
#   tsan            ThreadSanitizer on tests/c/threads.c
#   valgrind        valgrind memcheck on the API driver and alloc_fail
#   fuzz-run, fuzz-regress   libFuzzer (below)
CLANG ?= clang
TSAN_CC ?= $(CC)
WERROR_CFLAGS = $(FC_OPT_CFLAGS) -Werror
SAN_FLAGS = -fsanitize=address,undefined -fno-sanitize-recover=all -fno-omit-frame-pointer -g
TSAN_FLAGS = -fsanitize=thread -g
export ASAN_OPTIONS ?= detect_leaks=1:abort_on_error=0:strict_string_checks=1
export UBSAN_OPTIONS ?= print_stacktrace=1:halt_on_error=1
export TSAN_OPTIONS ?= halt_on_error=1
C_TEST_SRCS = $(wildcard tests/c/*.c)
C_TEST_BINS = $(patsubst tests/c/%.c,$(BUILD)/tests/%,$(C_TEST_SRCS))

.PHONY: c-tests check-c-tests check-gcc check-clang check-portable asan tsan

c-tests: $(C_TEST_BINS)
$(BUILD)/tests/%: tests/c/%.c csrc/fracconv.h $(BUILD)/libfracconv.a
	@mkdir -p $(BUILD)/tests
	$(CC) -O2 -std=c11 -Wall -Wextra -Werror -Icsrc $< $(BUILD)/libfracconv.a $(LIBS) -o $@

# The allocation-failure test routes the library's malloc, calloc and
# realloc (and pthread_create) through its own counters by the linker
# (--wrap): no hook in the library itself.
WRAP_ALLOC = -Wl,--wrap=malloc,--wrap=calloc,--wrap=realloc,--wrap=pthread_create
$(BUILD)/tests/alloc_fail: tests/c/alloc_fail.c csrc/fracconv.h $(BUILD)/libfracconv.a
	@mkdir -p $(BUILD)/tests
	$(CC) -O2 -std=c11 -Wall -Wextra -Werror -Icsrc $< $(BUILD)/libfracconv.a $(LIBS) $(WRAP_ALLOC) -o $@

check-c-tests: c-tests
	$(BUILD)/tests/api_driver
	$(BUILD)/tests/threads
	$(BUILD)/tests/alloc_fail

check-gcc:
	$(MAKE) CC=gcc CFLAGS="$(WERROR_CFLAGS)" BUILD=$(BUILD)/gcc lib check-c check-c-tests

check-clang:
	$(MAKE) CC=$(CLANG) CFLAGS="$(WERROR_CFLAGS)" BUILD=$(BUILD)/clang lib check-c check-c-tests

check-portable: $(BUILD)/tests/simd_compare
	$(MAKE) CFLAGS="$(WERROR_CFLAGS) -DFC_NO_SIMD" BUILD=$(BUILD)/portable lib check-c check-c-tests
	$(BUILD)/tests/simd_compare write $(BUILD)/simd_outputs.bin
	$(BUILD)/portable/tests/simd_compare check $(BUILD)/simd_outputs.bin

# The sanitizer flags go into CC, so that the library, the examples and
# the tests are all compiled and linked with them.
asan:
	$(MAKE) CC="$(CC) $(SAN_FLAGS)" CFLAGS="-O1" BUILD=$(BUILD)/asan lib check-c c-tests
	$(BUILD)/asan/tests/api_driver
	$(BUILD)/asan/tests/threads
	$(BUILD)/asan/tests/alloc_fail

tsan:
	$(MAKE) CC="$(TSAN_CC) $(TSAN_FLAGS)" CFLAGS="-O1" BUILD=$(BUILD)/tsan lib $(BUILD)/tsan/tests/threads
	$(BUILD)/tsan/tests/threads

# valgrind memcheck on the API driver and the allocation-failure test
# (README, "Reliability"): any memory error or leak (definite, indirect or
# possible) fails the target. A build of its own, -O1 -g, no sanitizers.
VALGRIND ?= valgrind
VALGRIND_FLAGS = --tool=memcheck --error-exitcode=99 --leak-check=full \
	--errors-for-leak-kinds=definite,indirect,possible --show-leak-kinds=definite,indirect,possible \
	--track-origins=yes -q
.PHONY: valgrind
valgrind:
	$(MAKE) CFLAGS="-O1 -g" BUILD=$(BUILD)/valgrind lib $(BUILD)/valgrind/tests/api_driver $(BUILD)/valgrind/tests/alloc_fail
	$(VALGRIND) $(VALGRIND_FLAGS) $(BUILD)/valgrind/tests/api_driver
	$(VALGRIND) $(VALGRIND_FLAGS) $(BUILD)/valgrind/tests/alloc_fail

# ---------------------------------------------------------------------------
# Fuzzing (README, "Reliability"; tests/fuzz/). libFuzzer targets built by
# clang with AddressSanitizer and UndefinedBehaviorSanitizer, the library
# compiled for coverage into $(FUZZ_DIR):
#   fuzz_<loader>          bytes straight into the loader
#   fuzz_<loader>_fixsum   every checksum recomputed first (fixsum.h)
# for the loaders stream_exact, stream_compressed (fc_stream_load),
# solver (fc_solver_load) and controller (fc_controller_load), and
# fuzz_args (the argument checking of the public functions).
#   make fuzz                       build them
#   make fuzz-run FUZZ_SECONDS=20   fuzz each target for FUZZ_SECONDS,
#                                   starting from the checked-in corpus
#                                   (new inputs go to $(FUZZ_DIR)/work)
#   make fuzz-regress               run every checked-in corpus input once
#   make fuzz-corpus                regenerate tests/fuzz/corpus (saved
#                                   states from tests/fuzz/make_corpus.c)
# A crash leaves its input in $(FUZZ_DIR)/artifacts/ and fails the target;
# once fixed, the input goes into tests/fuzz/found/<corpus folder>/.
FUZZ_CC ?= $(CLANG)
FUZZ_DIR = $(BUILD)/fuzz
FUZZ_SAN = -fsanitize=address,undefined -fno-sanitize-recover=all -fno-omit-frame-pointer -g
FUZZ_SECONDS ?= 20
FUZZ_LOADERS = stream_exact stream_compressed solver controller
FUZZ_TARGETS = $(foreach l,$(FUZZ_LOADERS),fuzz_$(l) fuzz_$(l)_fixsum) fuzz_args
FUZZ_BINS = $(addprefix $(FUZZ_DIR)/,$(FUZZ_TARGETS))
FUZZ_CORPUS = tests/fuzz/corpus
# allocator_may_return_null: a refused huge allocation must come back as
# FC_ERR_NOMEM, not end the run
FUZZ_ENV = ASAN_OPTIONS=detect_leaks=1:allocator_may_return_null=1:abort_on_error=0 \
	UBSAN_OPTIONS=print_stacktrace=1:halt_on_error=1
FUZZ_FLAGS = -timeout=20 -rss_limit_mb=2048 -print_final_stats=1
# the corpus folders of a target: the generated seeds, the inputs of
# faults found so far (tests/fuzz/found/, kept apart so that make
# fuzz-corpus never removes them) and, for streams and controllers,
# tests/data (saved states of the first format version)
fuzz_dir_of = $(patsubst fuzz_%,%,$(patsubst %_fixsum,%,$(1)))
fuzz_corpus_of = $(FUZZ_CORPUS)/$(call fuzz_dir_of,$(1)) \
	$(wildcard tests/fuzz/found/$(call fuzz_dir_of,$(1))) \
	$(if $(filter fuzz_stream_exact% fuzz_controller%,$(1)),tests/data)
fuzz_loader_of = $(if $(filter fuzz_solver%,$(1)),1,$(if $(filter fuzz_controller%,$(1)),2,0))

.PHONY: fuzz fuzz-run fuzz-regress fuzz-corpus

fuzz: $(FUZZ_BINS)

$(FUZZ_DIR)/libfracconv.a: $(SRCS) $(HDRS) csrc/flags.mk
	$(MAKE) CC="$(FUZZ_CC) $(FUZZ_SAN) -fsanitize=fuzzer-no-link" CFLAGS="-O1" \
		BUILD=$(FUZZ_DIR) $(FUZZ_DIR)/libfracconv.a

$(FUZZ_DIR)/fuzz_%: tests/fuzz/fuzz_load.c tests/fuzz/fixsum.h csrc/fracconv.h $(FUZZ_DIR)/libfracconv.a
	$(FUZZ_CC) $(FUZZ_SAN) -fsanitize=fuzzer -O1 -std=c11 -Wall -Wextra -Werror -Icsrc \
		-DFUZZ_LOADER=$(call fuzz_loader_of,fuzz_$*) -DFUZZ_FIX=$(if $(filter %_fixsum,$*),1,0) \
		$< $(FUZZ_DIR)/libfracconv.a $(LIBS) -o $@

$(FUZZ_DIR)/fuzz_args: tests/fuzz/fuzz_args.c csrc/fracconv.h $(FUZZ_DIR)/libfracconv.a
	$(FUZZ_CC) $(FUZZ_SAN) -fsanitize=fuzzer -O1 -std=c11 -Wall -Wextra -Werror -Icsrc \
		$< $(FUZZ_DIR)/libfracconv.a $(LIBS) -o $@

# One run target and one regression target per fuzz target (fuzz-run-T,
# fuzz-regress-T); fuzz-run and fuzz-regress run them one after another.
define FUZZ_RULES
.PHONY: fuzz-run-$(1) fuzz-regress-$(1)
fuzz-run-$(1): $(FUZZ_DIR)/$(1)
	@mkdir -p $(FUZZ_DIR)/artifacts $(FUZZ_DIR)/logs $(FUZZ_DIR)/work/$(1)
	@echo "== $(1): $(FUZZ_SECONDS) s (log: $(FUZZ_DIR)/logs/$(1).log)"
	@if $(FUZZ_ENV) $(FUZZ_DIR)/$(1) $(FUZZ_FLAGS) -max_total_time=$(FUZZ_SECONDS) \
		-artifact_prefix=$(FUZZ_DIR)/artifacts/$(1)- $(FUZZ_DIR)/work/$(1) \
		$(call fuzz_corpus_of,$(1)) > $(FUZZ_DIR)/logs/$(1).log 2>&1; then \
		grep -E '^(stat::number_of_executed_units|stat::new_units_added|stat::peak_rss_mb)' $(FUZZ_DIR)/logs/$(1).log || true; \
	else \
		tail -n 60 $(FUZZ_DIR)/logs/$(1).log; echo "$(1): FAILED"; exit 1; \
	fi
fuzz-regress-$(1): $(FUZZ_DIR)/$(1)
	@echo "== $(1): every corpus input once"
	@if $(FUZZ_ENV) $(FUZZ_DIR)/$(1) $(FUZZ_FLAGS) -runs=0 $(call fuzz_corpus_of,$(1)) \
		> $(FUZZ_DIR)/$(1).regress.log 2>&1; then \
		grep -E 'INITED|Done' $(FUZZ_DIR)/$(1).regress.log || true; \
	else \
		tail -n 60 $(FUZZ_DIR)/$(1).regress.log; echo "$(1): FAILED"; exit 1; \
	fi
endef
$(foreach t,$(FUZZ_TARGETS),$(eval $(call FUZZ_RULES,$(t))))

fuzz-run: $(addprefix fuzz-run-,$(FUZZ_TARGETS))
fuzz-regress: $(addprefix fuzz-regress-,$(FUZZ_TARGETS))

fuzz-corpus: $(BUILD)/make_corpus
	rm -rf $(FUZZ_CORPUS)/stream_exact $(FUZZ_CORPUS)/stream_compressed \
		$(FUZZ_CORPUS)/solver $(FUZZ_CORPUS)/controller $(FUZZ_CORPUS)/args
	mkdir -p $(FUZZ_CORPUS)/stream_exact $(FUZZ_CORPUS)/stream_compressed \
		$(FUZZ_CORPUS)/solver $(FUZZ_CORPUS)/controller $(FUZZ_CORPUS)/args
	$(BUILD)/make_corpus $(FUZZ_CORPUS)

$(BUILD)/make_corpus: tests/fuzz/make_corpus.c csrc/fracconv.h $(BUILD)/libfracconv.a
	$(CC) -O2 -std=c11 -Wall -Wextra -Werror -Icsrc $< $(BUILD)/libfracconv.a $(LIBS) -o $@
