# Makefile: builds tbeta (build/tbeta, build/libtbeta.a, build/libtbeta.so), installs it, runs its
# tests, demo and benchmarks.
# Every target first makes sure the Debian packages it needs are installed (scripts/deps.sh).

CC       ?= gcc
BUILD    ?= build
OPT      ?= -O2 -g
SAN      ?=
WARN     := -std=c11 -Wall -Wextra -Werror -Wshadow -Wmissing-prototypes -Wstrict-prototypes \
            -Wwrite-strings -Wundef -Wold-style-definition
CPPFLAGS := -Iinclude -Isrc -I/usr/include/suitesparse -D_POSIX_C_SOURCE=200809L
CFLAGS   := $(WARN) $(OPT) $(SAN) -fvisibility=hidden -fPIC -pthread
LDFLAGS  := $(SAN) -pthread
LDLIBS   := -lklu -lamd -lcolamd -lbtf -lsuitesparseconfig -ljansson -llapack -lblas -lm
TESTLIBS := -lcmocka

# The program: the command line and the regression runner behind 'tbeta check', which
# only main.c uses; libtbeta.a holds what include/tbeta.h publishes and its internals.
RUNNER_SRC := src/checkrun.c src/checkjson.c src/checkload.c src/checkreport.c src/checkfile.c src/checkhtml.c
PROG_SRC := src/main.c src/progress.c src/spreadcli.c src/blaspool.c $(RUNNER_SRC)
PROG_OBJ := $(PROG_SRC:src/%.c=$(BUILD)/obj/%.o)
RUNNER_OBJ := $(RUNNER_SRC:src/%.c=$(BUILD)/obj/%.o)
LIB_SRC  := $(filter-out $(PROG_SRC),$(wildcard src/*.c))
LIB_OBJ  := $(LIB_SRC:src/%.c=$(BUILD)/obj/%.o)
TEST_SRC := $(wildcard tests/test_*.c)
TEST_BIN := $(TEST_SRC:tests/%.c=$(BUILD)/tests/%)
DEPS_OK  := $(BUILD)/.deps-ok
DEMO     ?= netlists/noninverting_loaded_opamp.net
# the library's version (TB_VERSION in include/tbeta.h) and the shared library's soname
VERSION  := 0.1.0
SONAME   := libtbeta.so.0
SHLIB    := $(BUILD)/libtbeta.so.$(VERSION)
PREFIX   ?= /usr/local
DESTDIR  ?=

.PHONY: all deps test check demo asan valgrind debug bench fuzz clean install
all: $(BUILD)/tbeta $(BUILD)/libtbeta.a $(SHLIB)

$(DEPS_OK):
	@sh scripts/deps.sh
	@mkdir -p $(BUILD) && touch $@

deps:
	@sh scripts/deps.sh

$(BUILD)/obj/%.o: src/%.c $(wildcard src/*.h) include/tbeta.h | $(DEPS_OK)
	@mkdir -p $(dir $@)
	$(CC) $(CPPFLAGS) $(CFLAGS) -c $< -o $@

$(BUILD)/libtbeta.a: $(LIB_OBJ)
	rm -f $@
	ar rcs $@ $^

# the same objects (position-independent) as a shared library exporting only TB_API names
$(SHLIB): $(LIB_OBJ)
	$(CC) -shared -Wl,-soname,$(SONAME) $(LDFLAGS) $^ $(LDLIBS) -o $@

$(BUILD)/tbeta: $(PROG_OBJ) $(BUILD)/libtbeta.a
	$(CC) $(LDFLAGS) $^ $(LDLIBS) -o $@

# a test links libtbeta.a and the objects named as its extra prerequisites below
$(BUILD)/tests/%: tests/%.c tests/testutil.h $(BUILD)/libtbeta.a | $(DEPS_OK)
	@mkdir -p $(dir $@)
	$(CC) $(CPPFLAGS) $(CFLAGS) -Wno-missing-prototypes $< $(filter %.o,$^) $(BUILD)/libtbeta.a $(LDFLAGS) $(LDWRAP) $(TESTLIBS) $(LDLIBS) -o $@

# helper programs of the reference scripts (tests/ref/*.py): built by make check, not run as tests
TOOL_BIN := $(patsubst tests/%.c,$(BUILD)/tests/%,$(wildcard tests/tool_*.c))
$(BUILD)/tests/tool_%: tests/tool_%.c $(BUILD)/libtbeta.a | $(DEPS_OK)
	@mkdir -p $(dir $@)
	$(CC) $(CPPFLAGS) $(CFLAGS) $< $(BUILD)/libtbeta.a $(LDFLAGS) $(LDLIBS) -o $@

# tests of the regression runner link its objects (they are not in libtbeta.a)
$(BUILD)/tests/test_expect $(BUILD)/tests/test_oom: $(RUNNER_OBJ)

# the allocation-failure sweep sees every allocation the library makes
$(BUILD)/tests/test_oom: LDWRAP := -Wl,--wrap=malloc,--wrap=calloc,--wrap=realloc

# install: the program, both libraries, the header, tbeta.pc for pkg-config and the man page,
# under $(DESTDIR)$(PREFIX) (default /usr/local).
install: all
	install -d $(DESTDIR)$(PREFIX)/bin $(DESTDIR)$(PREFIX)/lib/pkgconfig $(DESTDIR)$(PREFIX)/include \
	    $(DESTDIR)$(PREFIX)/share/man/man1
	install -m 755 $(BUILD)/tbeta $(DESTDIR)$(PREFIX)/bin/tbeta
	install -m 644 $(BUILD)/libtbeta.a $(DESTDIR)$(PREFIX)/lib/libtbeta.a
	install -m 755 $(SHLIB) $(DESTDIR)$(PREFIX)/lib/libtbeta.so.$(VERSION)
	ln -sf libtbeta.so.$(VERSION) $(DESTDIR)$(PREFIX)/lib/$(SONAME)
	ln -sf $(SONAME) $(DESTDIR)$(PREFIX)/lib/libtbeta.so
	install -m 644 include/tbeta.h $(DESTDIR)$(PREFIX)/include/tbeta.h
	sed -e 's|@PREFIX@|$(PREFIX)|' -e 's|@VERSION@|$(VERSION)|' docs/tbeta.pc.in \
	    > $(DESTDIR)$(PREFIX)/lib/pkgconfig/tbeta.pc
	install -m 644 docs/tbeta.1 $(DESTDIR)$(PREFIX)/share/man/man1/tbeta.1

# check: build and run every test in $(BUILD) (RUNWRAP wraps each test program).
check: $(BUILD)/tbeta $(SHLIB) $(TEST_BIN) $(TOOL_BIN)
	@sh tests/run.sh $(BUILD) "$(RUNWRAP)"

test: check

demo: $(BUILD)/tbeta
	./$(BUILD)/tbeta $(DEMO)

asan:
	@$(MAKE) --no-print-directory BUILD=build/asan OPT="-O1 -g -fno-omit-frame-pointer" \
	    SAN="-fsanitize=address,undefined -fno-sanitize-recover=all" check

valgrind:
	@sh scripts/deps.sh valgrind
	@$(MAKE) --no-print-directory BUILD=build/valgrind OPT="-O1 -g" \
	    RUNWRAP="valgrind -q --error-exitcode=99 --leak-check=full --errors-for-leak-kinds=definite,indirect" check

debug:
	@$(MAKE) --no-print-directory BUILD=build/debug OPT="-O0 -g3" all

bench: $(BUILD)/tbeta $(BUILD)/libtbeta.a
	@sh bench/run.sh $(BUILD)

# fuzz: libFuzzer (clang) for SECONDS seconds in all: two thirds over read-parse-analyse-report-
# .expect (tests/fuzz/fuzz_netlist.c, corpus in build/fuzz/corpus seeded from netlists/ (and
# devices/), tests/device/, tests/bad/, tests/ref/, tests/fb/ and tests/dist/), one third over the
# runner's saved runs as baselines and shards (tests/fuzz/fuzz_runner.c, corpus in
# build/fuzz/corpus-runner seeded with --save and --json files of tests/check and netlists/);
# crashes land in build/fuzz/.
SECONDS  ?= 60
FUZZ_CC  := clang
FUZZ_FLAGS := -std=c11 -g -O1 -fsanitize=fuzzer,address,undefined -fno-sanitize-recover=all
# a unit slower than FUZZ_TIMEOUT seconds of wall time is a finding (the machine is shared: the
# slowest legal units take about 2 s of CPU under the sanitizers, 0.3 s in the normal build)
FUZZ_TIMEOUT ?= 30
FUZZ_OPTS = -timeout=$(FUZZ_TIMEOUT) -print_final_stats=1
fuzz: $(BUILD)/tbeta
	@sh scripts/deps.sh clang libclang-rt-14-dev
	@mkdir -p build/fuzz/corpus build/fuzz/corpus-runner
	$(FUZZ_CC) $(FUZZ_FLAGS) $(CPPFLAGS) $(LIB_SRC) tests/fuzz/fuzz_netlist.c $(LDLIBS) -o build/fuzz/fuzz_netlist
	$(FUZZ_CC) $(FUZZ_FLAGS) $(CPPFLAGS) $(LIB_SRC) $(RUNNER_SRC) tests/fuzz/fuzz_runner.c $(LDLIBS) \
	    -o build/fuzz/fuzz_runner
	cp netlists/*.net netlists/devices/*.net tests/device/*.net tests/bad/*.net tests/ref/*.net tests/fb/*.net tests/dist/*.net tests/spread/*.net docs/examples/spread_*.net build/fuzz/corpus/ 2>/dev/null || true
	cd build/fuzz && for lib in ../../tests/check ../../netlists; do n=$$(basename $$lib); \
	    ../../$(BUILD)/tbeta check $$lib --save corpus-runner/$$n-save.json --json corpus-runner/$$n.json \
	    >/dev/null 2>&1; ../../$(BUILD)/tbeta check $$lib --shard 1/2 --json corpus-runner/$$n-shard.json \
	    >/dev/null 2>&1; true; done
	cd build/fuzz && ./fuzz_netlist -max_total_time=$$(( $(SECONDS) * 2 / 3 )) -max_len=4096 $(FUZZ_OPTS) corpus
	cd build/fuzz && ./fuzz_runner -max_total_time=$$(( $(SECONDS) - $(SECONDS) * 2 / 3 )) \
	    -max_len=131072 $(FUZZ_OPTS) corpus-runner

clean:
	rm -rf build
