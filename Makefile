# rowfit: build, demo, tests, benchmark. See README.md and DEVELOPERS.md.
#   make            build ./rowfit
#   make deps       install missing Debian packages to build and run (apt-get, as root)
#   make test-deps  the same, plus what the tests need (make check does this)
#   make demo       build and run the demo job (workbooks/house-prices.job)
#   make check      build and run every test; SANITIZE=1 under ASan+UBSan
#   make bench      speed and memory benchmark (not part of check)
#   make install PREFIX=/usr/local ; make clean

VERSION  := 0.1.0
PREFIX   ?= /usr/local
CC       ?= cc
OPT      ?= -O2
SANITIZE ?= 0

WARN    := -Wall -Wextra -Wpedantic -Wshadow -Wwrite-strings
CFLAGS  += -std=c11 $(OPT) -g $(WARN) -pthread -D_POSIX_C_SOURCE=200809L \
           -DROWFIT_VERSION='"$(VERSION)"'
LDLIBS  := -pthread -lxlsxwriter -lfreexl -lgsl -lopenblas -lminizip -lexpat -lz -lnettle -lm

ifeq ($(SANITIZE),1)
BUILD   := build-san
CFLAGS  += -fsanitize=address,undefined -fno-omit-frame-pointer -fno-sanitize-recover=undefined
LDFLAGS += -fsanitize=address,undefined
else
BUILD   := build
endif

# Debian packages: the build needs the -dev ones, the tests the rest.
DEB_BUILD := gcc make pkg-config libxlsxwriter-dev libgsl-dev libopenblas-dev libopenblas-pthread-dev \
             libminizip-dev libexpat1-dev zlib1g-dev libfreexl-dev nettle-dev
DEB_TEST  := libcmocka-dev python3 python3-openpyxl python3-statsmodels libreoffice-calc-nogui time \
             clang libclang-rt-14-dev python3-sklearn

IO_SRC     := $(sort $(wildcard io/*.c))
ENGINE_SRC := $(sort $(filter-out engine/main.c,$(wildcard engine/*.c)))
LIB_OBJ    := $(patsubst %.c,$(BUILD)/%.o,$(IO_SRC) $(ENGINE_SRC))
TEST_SRC   := $(sort $(wildcard tests/test_*.c))
TEST_BIN   := $(patsubst tests/%.c,$(BUILD)/tests/%,$(TEST_SRC))

ifeq ($(SANITIZE),1)
PROG := $(BUILD)/rowfit
else
PROG := rowfit
endif

.PHONY: all deps test-deps demo check unit bench bench-readers bench-cv bench-net fuzz fuzz-replay install clean
all: $(PROG)

$(PROG): $(BUILD)/engine/main.o $(LIB_OBJ)
	$(CC) $(LDFLAGS) -o $@ $^ $(LDLIBS)

$(BUILD)/%.o: %.c
	@mkdir -p $(dir $@)
	$(CC) $(CFLAGS) -MMD -MP -c -o $@ $<

# network.c's Adam update vectorizes only when sqrt need not set errno (it
# is never given a negative there; GCC ignores the flag as a function
# attribute), and with the vectorizer's usual cost model rather than -O2's
# "very cheap" one, which refuses loops of unknown length. HAVE_INLINE is
# GSL's switch for its inline functions (GSL manual, "Inline functions"):
# gsl_rng_get then calls the generator directly, and Adam's deal, 100,000
# draws an epoch, counted its rows in 0.29 to 0.30 ms instead of 0.37 to
# 0.49 (one thread, best of 50, tests of the deal's loop alone).
# -fno-tree-loop-distribute-patterns: GCC otherwise turns short copy loops
# into calls to memmove. It did so for the last inputs of every row the
# fused kernel gathered (6.8% of an Adam epoch of tests/bench_net.c); that
# loop now copies whole vectors when a row has 8 inputs or more, and the
# flag keeps the rest (fewer inputs, other short loops) free of the calls.
$(BUILD)/engine/network.o: CFLAGS += -fno-math-errno -fvect-cost-model=dynamic -fno-tree-loop-distribute-patterns -DHAVE_INLINE

# A unit test links the module objects; helpers in tests/testutil.h.
$(BUILD)/tests/test_%: tests/test_%.c tests/testutil.h tests/ziptest.h tests/tabletest.h $(LIB_OBJ)
	@mkdir -p $(dir $@)
	$(CC) $(CFLAGS) -o $@ $< $(LIB_OBJ) $(LDFLAGS) $(LDLIBS) -lcmocka

# The network test counts network.c's calls to cblas_dgemv (which path a
# pass takes: tests/test_network.c).
$(BUILD)/tests/test_network: tests/test_network.c tests/testutil.h $(LIB_OBJ)
	@mkdir -p $(dir $@)
	$(CC) $(CFLAGS) -o $@ $< $(LIB_OBJ) $(LDFLAGS) -Wl,--wrap=cblas_dgemv $(LDLIBS) -lcmocka

# The allocation-failure test wraps our objects' calls to the allocator
# (libraries keep theirs: --wrap only rebinds references in our objects).
OOM_WRAP := $(foreach f,malloc calloc realloc free strdup strndup,-Wl,--wrap=$(f))
$(BUILD)/tests/test_oom: tests/test_oom.c tests/testutil.h tests/tabletest.h $(LIB_OBJ)
	@mkdir -p $(dir $@)
	$(CC) $(CFLAGS) -o $@ $< $(LIB_OBJ) $(LDFLAGS) $(OOM_WRAP) $(LDLIBS) -lcmocka

# libFuzzer harnesses (tests/fuzz/README.md): `make fuzz` fuzzes each for
# FUZZ_TIME seconds; `make fuzz-replay` runs the committed seeds once each,
# as part of `make check`.
FUZZ_TIME  ?= 180
FUZZ_FLAGS := -g -O1 -fsanitize=fuzzer,address,undefined \
              -fno-sanitize-recover=undefined -std=c11 $(WARN) -D_POSIX_C_SOURCE=200809L
FUZZ_NAMES := csv job formula xlsx ods xls
FUZZ_BIN   := $(patsubst %,build-fuzz/fuzz_%,$(FUZZ_NAMES))
SHEET_SRC  := io/grid.c io/csv.c io/table.c io/error.c

build-fuzz/fuzz_csv: tests/fuzz/fuzz_csv.c io/csv.c io/table.c io/error.c
	@mkdir -p $(dir $@)
	clang $(FUZZ_FLAGS) -o $@ $(filter %.c,$^) -lm
build-fuzz/fuzz_job: tests/fuzz/fuzz_job.c engine/job.c engine/formula.c io/table.c io/error.c
	@mkdir -p $(dir $@)
	clang $(FUZZ_FLAGS) -o $@ $(filter %.c,$^) -lm
build-fuzz/fuzz_formula: tests/fuzz/fuzz_formula.c engine/formula.c io/table.c io/error.c
	@mkdir -p $(dir $@)
	clang $(FUZZ_FLAGS) -o $@ $(filter %.c,$^) -lm
build-fuzz/fuzz_xlsx: tests/fuzz/fuzz_xlsx.c io/xlsx.c io/zipxml.c $(SHEET_SRC)
	@mkdir -p $(dir $@)
	clang $(FUZZ_FLAGS) -o $@ $(filter %.c,$^) -lminizip -lexpat -lz -lm
build-fuzz/fuzz_ods: tests/fuzz/fuzz_ods.c io/ods.c io/zipxml.c $(SHEET_SRC)
	@mkdir -p $(dir $@)
	clang $(FUZZ_FLAGS) -o $@ $(filter %.c,$^) -lminizip -lexpat -lz -lm
build-fuzz/fuzz_xls: tests/fuzz/fuzz_xls.c io/xls.c $(SHEET_SRC)
	@mkdir -p $(dir $@)
	clang $(FUZZ_FLAGS) -o $@ $(filter %.c,$^) -lfreexl -lm

$(FUZZ_BIN): tests/fuzz/fuzzutil.h

fuzz: $(FUZZ_BIN)
	@for h in $(FUZZ_NAMES); do \
	    mkdir -p build-fuzz/corpus-$$h build-fuzz/crashes-$$h; \
	    build-fuzz/fuzz_$$h build-fuzz/corpus-$$h tests/fuzz/corpus-$$h \
	        -max_total_time=$(FUZZ_TIME) -print_final_stats=1 \
	        -artifact_prefix=build-fuzz/crashes-$$h/ || exit 1; \
	done

fuzz-replay: $(FUZZ_BIN)
	@for h in $(FUZZ_NAMES); do \
	    build-fuzz/fuzz_$$h tests/fuzz/corpus-$$h/* \
	        $$(ls -d tests/fuzz/crashes-$$h/* 2>/dev/null) > build-fuzz/replay-$$h.log 2>&1 \
	        || { cat build-fuzz/replay-$$h.log; exit 1; }; \
	    echo "fuzz-replay $$h: $$(ls tests/fuzz/corpus-$$h | wc -l) seeds, no crash"; \
	done

# The demo data generator (its output is committed in workbooks/).
$(BUILD)/gen-houses: workbooks/gen-houses.c
	@mkdir -p $(dir $@)
	$(CC) $(CFLAGS) $(LDFLAGS) -o $@ $< -lgsl -lopenblas -lm

# The second demo's generator (invented applicants; output committed).
$(BUILD)/gen-applicants: workbooks/gen-applicants.c
	@mkdir -p $(dir $@)
	$(CC) $(CFLAGS) $(LDFLAGS) -o $@ $< -lgsl -lopenblas -lm

-include $(shell find $(BUILD) -name '*.d' 2>/dev/null)

# What building and running need; the tests need more (test-deps).
deps:
	@sh tools/deps.sh $(DEB_BUILD)

test-deps:
	@sh tools/deps.sh $(DEB_BUILD) $(DEB_TEST)

demo: deps
	@$(MAKE) --no-print-directory all
	./rowfit workbooks/house-prices.job workbooks/applicants.job

check: test-deps
	@$(MAKE) --no-print-directory $(PROG) $(TEST_BIN) $(BUILD)/gen-houses $(FUZZ_BIN)
	@/usr/bin/python3 tests/oracle/logit_oracle.py $(BUILD)/oracle
	@/usr/bin/python3 tests/oracle/influence_oracle.py $(BUILD)/oracle
	@ROWFIT=$(PROG) BUILD=$(BUILD) GEN=$(BUILD)/gen-houses ROWFIT_ORACLE_DIR=$(BUILD)/oracle \
	    sh tests/run.sh $(TEST_BIN)

unit: $(TEST_BIN)
	@/usr/bin/python3 tests/oracle/logit_oracle.py $(BUILD)/oracle
	@/usr/bin/python3 tests/oracle/influence_oracle.py $(BUILD)/oracle
	@for t in $(TEST_BIN); do ROWFIT_ORACLE_DIR=$(BUILD)/oracle $$t || exit 1; done

# tests/bench_readers.c: the readers against the physical limits (inflate +
# expat with empty handlers; reading the bytes); `make bench` runs it, then
# the whole-job benchmark.
$(BUILD)/bench_readers: tests/bench_readers.c $(LIB_OBJ)
	@mkdir -p $(dir $@)
	$(CC) $(CFLAGS) -DHAVE_XLSX -o $@ $< $(LIB_OBJ) $(LDFLAGS) $(LDLIBS)

bench-readers: $(BUILD)/bench_readers
	$(BUILD)/bench_readers --rows $${ROWS:-1000000}

$(BUILD)/bench_cv: tests/bench_cv.c $(LIB_OBJ)
	@mkdir -p $(dir $@)
	$(CC) $(CFLAGS) -o $@ $< $(LIB_OBJ) $(LDFLAGS) $(LDLIBS)

bench-cv: $(BUILD)/bench_cv
	$(BUILD)/bench_cv --rows $${ROWS:-1000000}

# tests/bench_net.c: an epoch of the network (16 hidden units, 100,000 rows x
# 20 inputs) against the machine's cblas_dgemm rate.
$(BUILD)/bench_net: tests/bench_net.c $(LIB_OBJ)
	@mkdir -p $(dir $@)
	$(CC) $(CFLAGS) -o $@ $< $(LIB_OBJ) $(LDFLAGS) $(LDLIBS)

bench-net: $(BUILD)/bench_net
	$(BUILD)/bench_net --rows $${NET_ROWS:-100000} --epochs $${NET_EPOCHS:-40}

bench: all bench-readers bench-cv bench-net
	@sh tests/bench.sh

install: $(PROG)
	install -d $(DESTDIR)$(PREFIX)/bin
	install -m 755 $(PROG) $(DESTDIR)$(PREFIX)/bin/rowfit

clean:
	rm -rf build build-san build-fuzz rowfit workbooks/*-results.xlsx tests/out
