# mk/fuzz.mk - libFuzzer targets for the input stack and the fit reader (included by the Makefile).
#
#   make fuzz FUZZ_SECONDS=N   each target for N seconds (default 300), one at a
#                              time; what each finds grows build/fuzz/corpus/NAME
#   make fuzz-check            each target's past findings replayed, then about
#                              FUZZ_CHECK_SECONDS (default 30) of fuzzing each;
#                              part of `make check`
#
# A target NAME is tests/fuzz/fuzz_NAME.c (LLVMFuzzerTestOneInput against the
# library built with ASan+UBSan and coverage), its seeds tests/fuzz/corpus/NAME/,
# and the inputs that once failed it tests/fuzz/regressions/NAME/.  Adding one
# is adding its name to FUZZ_TARGETS.
#
# The compiler is Debian's clang with its libFuzzer runtime (packages clang and
# libclang-rt-dev, in DEBIAN_PACKAGES).  Without them fuzz-check says so and
# skips; it never passes in silence.

FUZZ_CC      ?= clang
FUZZ_TARGETS := rowsplit numparse model zstd fitjson gzip zframes
FUZZ_SECONDS ?= 300
FUZZ_CHECK_SECONDS ?= 30
FB           := $(B)/fuzz
FUZZ_SAN     := -fsanitize=address,undefined -fno-sanitize-recover=all -fno-omit-frame-pointer
FUZZ_CFLAGS  := $(STD) -O2 -g $(MATH) $(WARN) -ffp-contract=off -pthread -MMD -MP
FUZZ_OBJ     := $(LIB_SRC:%.c=$(FB)/%.o)
FUZZ_BIN     := $(FUZZ_TARGETS:%=$(FB)/fuzz_%)
# Recursive, so the probe runs only in the recipes that ask.
FUZZ_OK = $(shell mkdir -p $(FB) && printf 'int LLVMFuzzerTestOneInput(const char *d, unsigned long n) { (void)d; (void)n; return 0; }\n' | \
            $(FUZZ_CC) -fsanitize=fuzzer -x c - -o $(FB)/probe 2>/dev/null && echo yes; rm -f $(FB)/probe)
FUZZ_MISSING := no clang with libFuzzer (Debian packages clang and libclang-rt-dev, which make deps installs)

.PHONY: fuzz fuzz-build fuzz-check

$(FB)/%.o: %.c
	@mkdir -p $(dir $@)
	@$(if $(Q),echo "  CC fuzz $<")
	$(Q)$(FUZZ_CC) $(CPPFLAGS) $(FUZZ_CFLAGS) $(FUZZ_SAN) -fsanitize=fuzzer-no-link -c $< -o $@

$(FB)/libmillrace.a: $(FUZZ_OBJ)
	$(Q)rm -f $@ && ar rcs $@ $^

$(FB)/fuzz_%: tests/fuzz/fuzz_%.c $(FB)/libmillrace.a
	@$(if $(Q),echo "  LD fuzz $@")
	$(Q)$(FUZZ_CC) $(CPPFLAGS) $(FUZZ_CFLAGS) $(FUZZ_SAN) -fsanitize=fuzzer -o $@ $< $(FB)/libmillrace.a $(LIBS)

fuzz-build: $(FUZZ_BIN)

fuzz:
	@if [ -z "$(FUZZ_OK)" ]; then echo "fuzz: $(FUZZ_MISSING)"; exit 1; fi
	@$(MAKE) --no-print-directory fuzz-build
	sh tests/fuzz/run.sh long $(FUZZ_SECONDS) $(FB) $(FUZZ_TARGETS)

fuzz-check:
	@rm -f $(FB)/skipped
	@if [ -z "$(FUZZ_OK)" ]; then mkdir -p $(FB) && touch $(FB)/skipped; \
	  echo "fuzz-check: SKIPPED: $(FUZZ_MISSING)"; exit 0; fi; \
	$(MAKE) --no-print-directory fuzz-build && sh tests/fuzz/run.sh check $(FUZZ_CHECK_SECONDS) $(FB) $(FUZZ_TARGETS)

-include $(FUZZ_OBJ:.o=.d) $(FUZZ_BIN:=.d)
