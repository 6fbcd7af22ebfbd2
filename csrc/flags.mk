# Compiler flags of the C library: the one place they are written.
# Read by the Makefile (include) and by setup_build.py (the cffi extension,
# which parses the plain "NAME = words" lines below; keep them that simple).
# FC_OPT_CFLAGS is the default of the Makefile's overridable CFLAGS.
FC_OPT_CFLAGS = -O3
FC_STD_CFLAGS = -std=c11 -fno-math-errno -Wall -Wextra
# FC_THREAD_FLAGS: POSIX threads of the batch engines (csrc/parallel.c),
# given when compiling and when linking the library or a program using it.
FC_THREAD_FLAGS = -pthread
