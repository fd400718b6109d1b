# millrace - fit generalized linear models to files far larger than memory.
#
#   make            build the library and the command (build/millrace)
#   make demo       install missing Debian packages (as root) and fit the bundled sample
#   make check      the whole test suite: unit, command line, references, sanitizers, valgrind
#   make install    the command, libraries, header, millrace.pc, man page (mk/install.mk)
#   make asan       the library and unit tests built with ASan+UBSan (build/asan/)
#   make tsan-check the command tour under ThreadSanitizer
#   make bench      benchmarks (not tests; timings go to bench/results/)
#   make V=1        show the commands

# ---- settings ---------------------------------------------------------------
CC       ?= cc
OPT      ?= -O3 -g
# The library never reads errno after a math function, and without it sqrt
# is one instruction the vectoriser can use (element-wise IEEE operations:
# the same bits as scalar code; sums keep their order, as no reassociation
# is allowed).
MATH     := -fno-math-errno
WARN     := -Wall -Wextra -Werror
STD      := -std=c11
PKGS     := openblas lapacke jansson libzstd zlib
PKG_CFLAGS := $(shell pkg-config --cflags $(PKGS) 2>/dev/null)
PKG_LIBS   := $(shell pkg-config --libs $(PKGS) 2>/dev/null)
CHECK_CFLAGS := $(shell pkg-config --cflags check 2>/dev/null)
CHECK_LIBS   := $(shell pkg-config --libs check 2>/dev/null)
CPPFLAGS := -Iinclude -Isrc -DMR_BUILDING_LIBRARY $(PKG_CFLAGS)
# No contraction into fused multiply-adds, whatever -std says: every code
# path of a sum (src/accum/crossprod.c) must round the same way.
CFLAGS   := $(STD) $(OPT) $(MATH) $(WARN) -ffp-contract=off -fvisibility=hidden -pthread -MMD -MP
# OpenBLAS's serial build where Debian's libopenblas0-serial is installed:
# the library calls BLAS and LAPACK only on small matrices, from the thread
# that runs the fit, one call at a time (the serial build has no lock for
# concurrent calls; `make lint` keeps BLAS out of the workers), and the
# pthread build's pool thread spins for about 0.1 s of CPU after start-up
# for work it is never given (4% of a 10^7-row fit on 2 cores).
# LD_LIBRARY_PATH can still choose another BLAS.
MULTIARCH := $(shell $(CC) -print-multiarch 2>/dev/null)
# LAPACKE's own BLAS and LAPACK are named too, so that they come from the
# same directory (the pthread build's libblas needs its libopenblas).
SERIAL_BLAS_DIR := /usr/lib/$(MULTIARCH)/openblas-serial
SERIAL_BLAS := $(wildcard $(addprefix $(SERIAL_BLAS_DIR)/,libopenblas.so.0 libblas.so.3 liblapack.so.3))
ifeq ($(words $(SERIAL_BLAS)),3)
PKG_LIBS := -Wl,--push-state,--no-as-needed $(SERIAL_BLAS) -Wl,--pop-state -Wl,-rpath,$(SERIAL_BLAS_DIR) \
            $(filter-out -lopenblas,$(PKG_LIBS))
endif
LIBS     := -lcsv $(PKG_LIBS) -pthread -lm
SAN      := -fsanitize=address,undefined -fno-omit-frame-pointer -fno-sanitize-recover=all

# Debian packages building and running need (make deps, make demo).
DEBIAN_PACKAGES := build-essential pkg-config libzstd-dev zlib1g-dev libopenblas-dev libopenblas0-serial liblapacke-dev libcsv-dev \
                   libjansson-dev
# What only the tests add (make test-deps, make check): oracles, checkers,
# tools; groff-base renders the man page, gfortran gives the -lgfortran that
# openblas.pc names for a static link (tests/cli/install.sh), chromium shows
# the HTML page in a browser (tests/cli/html_browser.sh), clang and its
# runtime build the libFuzzer targets (make fuzz-check), OpenMPI builds and
# runs millrace-mpi (make mpi-check).
TEST_PACKAGES := zstd gzip check libsubunit-dev python3 python3-numpy python3-scipy \
                 python3-statsmodels r-base-core r-cran-mass r-cran-sandwich r-cran-statmod valgrind time groff-base \
                 gfortran chromium clang libclang-rt-dev python3-html5lib openmpi-bin libopenmpi-dev

ifeq ($(V),1)
Q :=
else
Q := @
endif

B := build
LIB_SRC  := $(wildcard src/common/*.c src/input/*.c src/model/*.c src/family/*.c \
                       src/accum/*.c src/solve/*.c src/fit/*.c src/output/*.c)
LIB_OBJ  := $(LIB_SRC:%.c=$(B)/%.o)
ASAN_OBJ := $(LIB_SRC:%.c=$(B)/asan/%.o)
TSAN_OBJ := $(LIB_SRC:%.c=$(B)/tsan/%.o)
ALLOC_OBJ := $(LIB_SRC:%.c=$(B)/allocfail/%.o)
IOFAIL_OBJ := $(LIB_SRC:%.c=$(B)/iofail/%.o)
UNIT_SRC := $(filter-out tests/check_alloc.c tests/check_io.c,$(wildcard tests/check_*.c))
UNIT_BIN := $(UNIT_SRC:tests/%.c=$(B)/tests/%)
ASAN_UNIT_BIN := $(UNIT_SRC:tests/%.c=$(B)/asan/tests/%)
CLI_SRC  := $(filter-out src/cli/mpi_%.c,$(wildcard src/cli/*.c))

.PHONY: all deps test-deps demo check check-groups unit asan asan-check tsan-check alloc-check io-fault-check valgrind-check cli-check ref-check lint bench clean
.PHONY: bench-instructions

all: $(B)/millrace $(B)/synth

# ---- the library and the command ------------------------------------------
$(B)/%.o: %.c
	@mkdir -p $(dir $@)
	@$(if $(Q),echo "  CC      $<")
	$(Q)$(CC) $(CPPFLAGS) $(CFLAGS) -c $< -o $@

$(B)/asan/%.o: %.c
	@mkdir -p $(dir $@)
	@$(if $(Q),echo "  CC asan $<")
	$(Q)$(CC) $(CPPFLAGS) $(CFLAGS) $(SAN) -c $< -o $@

$(B)/tsan/%.o: %.c
	@mkdir -p $(dir $@)
	@$(if $(Q),echo "  CC tsan $<")
	$(Q)$(CC) $(CPPFLAGS) $(CFLAGS) -fsanitize=thread -c $< -o $@

$(B)/tsan/libmillrace.a: $(TSAN_OBJ)
	$(Q)rm -f $@ && ar rcs $@ $^

$(B)/tsan/millrace: $(CLI_SRC:%.c=$(B)/tsan/%.o) $(B)/tsan/libmillrace.a
	$(Q)$(CC) $(CFLAGS) -fsanitize=thread -o $@ $^ $(LIBS)

# A library built with one failure-test flag, under ASan, and the Check
# suite that drives it: $(1) build folder, $(2) flag, $(3) suite.
define failure_build
$(B)/$(1)/%.o: %.c
	@mkdir -p $$(dir $$@)
	@$$(if $$(Q),echo "  CC $(1) $$<")
	$$(Q)$$(CC) $$(CPPFLAGS) $(2) $$(CFLAGS) $$(SAN) -c $$< -o $$@

$(B)/$(1)/libmillrace.a: $$(LIB_SRC:%.c=$(B)/$(1)/%.o)
	$$(Q)rm -f $$@ && ar rcs $$@ $$^

$(B)/$(1)/$(3): tests/$(3).c $(B)/$(1)/libmillrace.a
	$$(Q)$$(CC) $$(CPPFLAGS) $(2) $$(CHECK_CFLAGS) $$(CFLAGS) $$(SAN) -o $$@ $$< \
	  $(B)/$(1)/libmillrace.a $$(CHECK_LIBS) $$(LIBS)
endef
$(eval $(call failure_build,allocfail,-DMR_ALLOC_FAILURE_TESTS,check_alloc))
$(eval $(call failure_build,iofail,-DMR_IO_FAILURE_TESTS,check_io))

# Every allocation of a fit made to fail in turn (ASan watches for leaks).
alloc-check: $(B)/allocfail/check_alloc
	./$(B)/allocfail/check_alloc

# Each read, write, sync, close and rename of a fit and its JSON made to
# fail in turn, then each read and write made short (ASan watches for leaks).
io-fault-check: $(B)/iofail/check_io
	./$(B)/iofail/check_io

$(B)/libmillrace.a: $(LIB_OBJ)
	$(Q)rm -f $@ && ar rcs $@ $^

$(B)/asan/libmillrace.a: $(ASAN_OBJ)
	$(Q)rm -f $@ && ar rcs $@ $^

$(B)/millrace: $(CLI_SRC:%.c=$(B)/%.o) $(B)/libmillrace.a
	$(Q)$(CC) $(CFLAGS) -o $@ $^ $(LIBS)

$(B)/asan/millrace: $(CLI_SRC:%.c=$(B)/asan/%.o) $(B)/asan/libmillrace.a
	$(Q)$(CC) $(CFLAGS) $(SAN) -o $@ $^ $(LIBS)

$(B)/synth: tools/synth.c
	@mkdir -p $(B)
	$(Q)$(CC) $(STD) -O2 $(WARN) -o $@ $< -lzstd -lm

# ---- dependencies and the demo ----------------------------------------------
deps:
	@sh tools/install-deps.sh $(DEBIAN_PACKAGES)

test-deps:
	@sh tools/install-deps.sh $(DEBIAN_PACKAGES) $(TEST_PACKAGES)

demo: deps
	@$(MAKE) --no-print-directory $(B)/millrace
	./$(B)/millrace fit --model samples/falls.model --json $(B)/falls-fit.json samples/falls.csv.zst
	@echo "(the same fit as JSON: $(B)/falls-fit.json)"

# ---- tests --------------------------------------------------------------------
$(B)/tests/%: tests/%.c $(B)/libmillrace.a
	@mkdir -p $(dir $@)
	$(Q)$(CC) $(CPPFLAGS) $(CHECK_CFLAGS) $(CFLAGS) -o $@ $< $(B)/libmillrace.a $(CHECK_LIBS) $(LIBS)

$(B)/asan/tests/%: tests/%.c $(B)/asan/libmillrace.a
	@mkdir -p $(dir $@)
	$(Q)$(CC) $(CPPFLAGS) $(CHECK_CFLAGS) $(CFLAGS) $(SAN) -o $@ $< $(B)/asan/libmillrace.a $(CHECK_LIBS) $(LIBS)

$(B)/tsan/tests/%: tests/%.c $(B)/tsan/libmillrace.a
	@mkdir -p $(dir $@)
	$(Q)$(CC) $(CPPFLAGS) $(CHECK_CFLAGS) $(CFLAGS) -fsanitize=thread -o $@ $< $(B)/tsan/libmillrace.a $(CHECK_LIBS) \
	  $(LIBS)

# The cross products once more on their portable path (no AVX2 clone): both
# paths must give the same bits.
$(B)/tests/check_crossprod_portable: tests/check_crossprod.c src/accum/crossprod.c
	@mkdir -p $(dir $@)
	$(Q)$(CC) $(CPPFLAGS) -DMR_CROSSPROD_PORTABLE $(CHECK_CFLAGS) $(filter-out -MMD -MP,$(CFLAGS)) -o $@ $^ \
	  $(CHECK_LIBS) $(LIBS)

unit: $(UNIT_BIN) $(B)/tests/check_crossprod_portable
	@for t in $(UNIT_BIN) $(B)/tests/check_crossprod_portable; do echo "== $$t"; ./$$t || exit 1; done

asan: $(ASAN_UNIT_BIN) $(B)/asan/millrace

asan-check: asan $(B)/synth
	@for t in $(ASAN_UNIT_BIN); do echo "== $$t (ASan+UBSan)"; MR_TEST_QUICK=1 ./$$t || exit 1; done
	MILLRACE=$(B)/asan/millrace bash tests/cli/smoke.sh
	MILLRACE=$(B)/asan/millrace bash tests/cli/threads.sh
	MILLRACE=$(CURDIR)/$(B)/asan/millrace bash tests/cli/outputs.sh
	MILLRACE=$(CURDIR)/$(B)/asan/millrace bash tests/cli/drift.sh
	MILLRACE=$(CURDIR)/$(B)/asan/millrace bash tests/cli/checkpoint.sh
	MILLRACE=$(CURDIR)/$(B)/asan/millrace bash tests/cli/robust.sh
	MILLRACE=$(CURDIR)/$(B)/asan/millrace bash tests/cli/filesets.sh
	MILLRACE=$(CURDIR)/$(B)/asan/millrace bash tests/cli/html.sh

# The threaded paths under ThreadSanitizer (OpenBLAS is not instrumented:
# its internal races are not ours and are suppressed); check_share's ranks
# are threads of one process exchanging through memory.
tsan-check: $(B)/tsan/millrace $(B)/synth $(B)/tsan/tests/check_share
	TSAN_OPTIONS="halt_on_error=1 suppressions=$(CURDIR)/tests/tsan.supp" MR_TEST_QUICK=1 \
	  ./$(B)/tsan/tests/check_share
	TSAN_OPTIONS="halt_on_error=1 suppressions=$(CURDIR)/tests/tsan.supp" MILLRACE=$(B)/tsan/millrace \
	  bash tests/cli/threads.sh
	TSAN_OPTIONS="halt_on_error=1 suppressions=$(CURDIR)/tests/tsan.supp" MILLRACE=$(CURDIR)/$(B)/tsan/millrace \
	  bash tests/cli/filesets.sh

valgrind-check: all
	MILLRACE="valgrind --quiet --error-exitcode=99 --leak-check=full --errors-for-leak-kinds=definite $(B)/millrace" \
	  bash tests/cli/smoke.sh

cli-check: all
	@for t in $(filter-out tests/cli/mpi.sh,$(wildcard tests/cli/*.sh)); do echo "== $$t"; bash $$t || exit 1; done

ref-check: all $(B)/tests/check_spline
	@for t in tests/ref/*.py; do echo "== $$t"; /usr/bin/python3 $$t || exit 1; done

# The library must never print or exit: only the command talks to the terminal.
# BLAS and LAPACK stay on the thread that runs the fit (solver and results):
# Debian's serial OpenBLAS is not safe to call from two threads at once.
# A folder includes only folders below it (tools/check-layers.sh).
lint:
	@if grep -nE '\b(printf|fprintf|puts|fputs|perror|exit|abort|_Exit)\s*\(' $(LIB_SRC) | grep -v 'snprintf\|vsnprintf' ; then \
	  echo "lint: the library must not print or exit (see above)"; exit 1; fi
	@echo "lint: the library neither prints nor exits"
	@if grep -nE '\b(cblas_|LAPACKE_)[a-z_]+\s*\(' $(filter-out src/solve/% src/fit/%,$(LIB_SRC)); then \
	  echo "lint: BLAS or LAPACK called outside src/solve and src/fit (see above)"; exit 1; fi
	@echo "lint: BLAS and LAPACK only in src/solve and src/fit"
	@sh tools/check-layers.sh src
	@/usr/bin/python3 tools/gen_numparse_table.py | cmp -s - src/input/numparse_table.h || \
	  { echo "lint: src/input/numparse_table.h differs from what tools/gen_numparse_table.py writes"; exit 1; }
	@/usr/bin/python3 tools/gen_dtoa_table.py | cmp -s - src/common/dtoa_table.h || \
	  { echo "lint: src/common/dtoa_table.h differs from what tools/gen_dtoa_table.py writes"; exit 1; }
	@echo "lint: generated tables are current"

# The test packages first, then every group in a make that sees them.
check: test-deps
	@$(MAKE) --no-print-directory check-groups

check-groups: lint unit cli-check ref-check asan-check tsan-check alloc-check io-fault-check valgrind-check fuzz-check \
              mpi-check
	@echo "test groups: lint, unit, cli, reference, asan+ubsan, tsan, allocation failures, I/O failures, valgrind, fuzz, mpi"
	@skipped=0; \
	if [ -f $(B)/fuzz/skipped ]; then echo "fuzz skipped: no clang"; skipped=$$((skipped + 1)); fi; \
	if [ -f $(B)/mpi-skipped ]; then echo "mpi skipped: no mpicc or mpirun"; skipped=$$((skipped + 1)); fi; \
	if [ $$skipped -gt 0 ]; then echo "check: $$((11 - skipped)) passed, 0 failed, $$skipped skipped"; \
	else echo "check: 11 passed, 0 failed"; fi

# ---- benchmarks (never a test) ------------------------------------------------
bench: all
	/usr/bin/python3 bench/run.py
	/usr/bin/python3 bench/pipeline.py
	-$(MAKE) --no-print-directory mpi
	/usr/bin/python3 bench/scale.py
	/usr/bin/python3 bench/models.py

# instruction counts (callgrind, 3 x 10^5 rows; bench/models.py's `many` factor at 10^6)
# and peak RSS: figures that a busy machine does not change
bench-instructions: all
	nice -n 10 /usr/bin/python3 bench/pipeline.py --instructions
	nice -n 10 /usr/bin/python3 bench/models.py --instructions

clean:
	rm -rf $(B)

include mk/install.mk
include mk/fuzz.mk

-include $(LIB_OBJ:.o=.d) $(ASAN_OBJ:.o=.d) $(TSAN_OBJ:.o=.d) $(ALLOC_OBJ:.o=.d) $(IOFAIL_OBJ:.o=.d) $(CLI_SRC:%.c=$(B)/%.d)

# ---- millrace-mpi: the fit command across processes (optional) -------------
# Compiled by mpicc from the command's files and mpi_main.c (in place of
# main.c); the plain build never needs MPI (src/cli/mpi_*.c stay out of it).
MPICC ?= mpicc
MPI_CLI_OBJ := $(patsubst %.c,$(B)/%.o,$(filter-out src/cli/main.c,$(CLI_SRC)))

$(B)/mpi/src/cli/mpi_main.o: src/cli/mpi_main.c
	@mkdir -p $(dir $@)
	@$(if $(Q),echo "  MPICC   $<")
	$(Q)$(MPICC) $(CPPFLAGS) -Isrc/cli $(CFLAGS) -c $< -o $@

$(B)/millrace-mpi: $(B)/mpi/src/cli/mpi_main.o $(MPI_CLI_OBJ) $(B)/libmillrace.a
	$(Q)$(MPICC) $(CFLAGS) -o $@ $^ $(LIBS)

.PHONY: mpi mpi-check
mpi: $(B)/millrace-mpi

# Without mpicc and mpirun the test says SKIPPED (and check-groups counts it).
mpi-check: all
	@rm -f $(B)/mpi-skipped
	@if command -v $(MPICC) > /dev/null && command -v mpirun > /dev/null; then \
	  $(MAKE) --no-print-directory mpi && bash tests/cli/mpi.sh; \
	else bash tests/cli/mpi.sh && touch $(B)/mpi-skipped; fi
