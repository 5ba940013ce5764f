#!/usr/bin/env bash
# veer's test command (the README's second command; .ci/run calls it).
#
# On a fresh Debian 12 machine it installs what is missing, builds the library,
# tests and examples with warnings as errors, runs the Criterion suites through
# CTest, installs into a temporary prefix and builds the consumer example
# against the installed package (CMake and pkg-config), runs the benchmark when
# asked and the pytest suites when they exist. Prints a PASS/FAIL summary and
# exits non-zero on any failure.
#
# Environment (all optional):
#   VEER_BUILD_DIR   build directory, made afresh (default: build/ci in the repo)
#   VEER_JOBS        parallel build and test jobs (default: nproc)
#   VEER_CMAKE_ARGS  extra arguments for the configure step (split on spaces)
#   VEER_SKIP_DEPS=1 do not check or install Debian packages
#   VEER_CLANG=0     skip the clang -Werror build
#   VEER_BENCH=1     run examples/bench_plan after the tests
#   VEER_HARDEN=0    skip the hardening stages (sanitize, valgrind, fuzz)
#   VEER_FUZZ_SECONDS  seconds of fuzzing per target (default 20; three targets)
#   VEER_FUZZ_SEED   libFuzzer's seed (default 1, so runs repeat; 0: a new one each run)
#   VEER_KEEP_TMP=1  keep the temporary install prefix and print where it is
#
# Each stage is one function below; add a stage by writing a function and a
# run_stage line in main(). A stage fails on the first failing command (it runs
# in a subshell with errexit), skips itself with `skip "reason"`, and may list
# stages it needs: it is not run when one of them failed.
set -euo pipefail

REPO=$(cd "$(dirname "${BASH_SOURCE[0]}")/.." && pwd)
BUILD_DIR=${VEER_BUILD_DIR:-$REPO/build/ci}
JOBS=${VEER_JOBS:-$(nproc 2>/dev/null || echo 2)}
PYTHON=/usr/bin/python3   # Debian's python3, which has numpy and scipy
CTEST_TIMEOUT=1200        # s per Criterion suite
PYTEST_TIMEOUT=1800       # s for all pytest suites
BENCH_TIMEOUT=600         # s for the benchmark

# Debian 12 packages the build, the tests and the later stages need.
DEBIAN_PACKAGES=(build-essential cmake pkg-config clang libcriterion-dev nanopb libnanopb-dev
    protobuf-compiler libsodium-dev python3-protobuf python3-numpy python3-scipy
    python3-matplotlib python3-pytest python3-shapely valgrind libclang-rt-dev)

# Warnings the consumer example is compiled with by hand (the library's own
# set lives in CMakeLists.txt).
CONSUMER_WARNINGS=(-std=c11 -Wall -Wextra -Wshadow -Wstrict-prototypes -Wmissing-prototypes
    -Wdouble-promotion -Wvla -Werror)

TMP_ROOT=$(mktemp -d "${TMPDIR:-/tmp}/veer-run.XXXXXX")
PREFIX=$TMP_ROOT/prefix   # cmake --install goes here
NOTE_FILE=$TMP_ROOT/note  # a stage's one-line note for the summary
COUNT_FILE=$TMP_ROOT/counts # "passed N" / "failed N" / "skipped N" lines from test runners
: >"$COUNT_FILE"

cleanup() {
    if [[ ${VEER_KEEP_TMP:-0} == 1 ]]; then
        echo "run.sh: kept $TMP_ROOT"
    else
        rm -rf "$TMP_ROOT"
    fi
}
trap cleanup EXIT

# ---- helpers ---------------------------------------------------------------

declare -A RESULT=()
STAGES=()
NOTES=()
TIMES=()

log() { printf 'run.sh: %s\n' "$*"; }
# Inside a stage: end it as skipped, with the reason shown in the summary.
skip() {
    printf '%s\n' "$*" >"$NOTE_FILE"
    log "SKIP: $*"
    exit 77
}
# Inside a stage: a note for the summary line (the last one wins).
note() { printf '%s\n' "$*" >"$NOTE_FILE"; }
# Inside a stage: add test-case counts for the closing line.
count() { printf '%s %s\n' "$1" "$2" >>"$COUNT_FILE"; }

# run_stage NAME FUNCTION [NEEDED_STAGE...]
run_stage() {
    local name=$1 fn=$2 need rc t0
    shift 2
    for need in "$@"; do
        case ${RESULT[$need]:-} in
        PASS | SKIP) ;;
        *)
            STAGES+=("$name") RESULT[$name]="NOT RUN" NOTES+=("needs $need") TIMES+=(0)
            return 0
            ;;
        esac
    done
    printf '\n======== %s ========\n' "$name"
    : >"$NOTE_FILE"
    t0=$SECONDS
    set +e
    (
        set -euo pipefail
        "$fn"
    )
    rc=$?
    set -e
    STAGES+=("$name") TIMES+=($((SECONDS - t0)))
    case $rc in
    0) RESULT[$name]=PASS ;;
    77) RESULT[$name]=SKIP ;;
    *)
        RESULT[$name]=FAIL
        [[ -s $NOTE_FILE ]] || echo "exit status $rc (see its output above)" >"$NOTE_FILE"
        log "FAIL: stage $name (exit status $rc)"
        ;;
    esac
    NOTES+=("$(head -n 1 "$NOTE_FILE")")
}

as_root() {
    if [[ $(id -u) == 0 ]]; then
        "$@"
    elif command -v sudo >/dev/null 2>&1; then
        sudo "$@"
    else
        log "not root and no sudo: cannot run $*"
        return 1
    fi
}

# ---- stages ----------------------------------------------------------------

stage_deps() {
    [[ ${VEER_SKIP_DEPS:-0} == 1 ]] && skip "VEER_SKIP_DEPS=1"
    command -v dpkg-query >/dev/null 2>&1 || skip "no dpkg-query (not Debian): install ${DEBIAN_PACKAGES[*]} by hand"
    local missing=() p
    for p in "${DEBIAN_PACKAGES[@]}"; do
        if ! dpkg-query -W -f='${Status}' "$p" 2>/dev/null | grep -q '^install ok installed$'; then
            missing+=("$p")
        fi
    done
    if ((${#missing[@]} == 0)); then
        note "all ${#DEBIAN_PACKAGES[@]} packages present"
        return 0
    fi
    note "installing: ${missing[*]}"
    log "missing Debian packages: ${missing[*]}"
    export DEBIAN_FRONTEND=noninteractive
    as_root env DEBIAN_FRONTEND=noninteractive apt-get update
    as_root env DEBIAN_FRONTEND=noninteractive apt-get install -y -o Acquire::Retries=3 "${missing[@]}"
    note "installed: ${missing[*]}"
}

# A fresh build directory; refuses to delete a directory that is not a build tree.
fresh_dir() {
    local dir=$1
    if [[ -e $dir ]]; then
        if [[ $dir == / || $dir == "$REPO" || $dir == "$HOME" ]]; then
            log "refusing to use $dir as a build directory"
            return 1
        fi
        if [[ -n $(ls -A "$dir") && ! -f $dir/CMakeCache.txt ]]; then
            log "$dir exists, is not empty and is not a CMake build tree; not deleting it"
            return 1
        fi
        rm -rf "$dir"
    fi
    mkdir -p "$dir"
}

stage_configure() {
    fresh_dir "$BUILD_DIR"
    # shellcheck disable=SC2086 # VEER_CMAKE_ARGS is a list of words on purpose
    cmake -S "$REPO" -B "$BUILD_DIR" -DVEER_WERROR=ON -DCMAKE_INSTALL_PREFIX="$PREFIX" ${VEER_CMAKE_ARGS:-}
}

stage_build() {
    cmake --build "$BUILD_DIR" -j "$JOBS"
}

stage_ctest() {
    local rc=0 out=$TMP_ROOT/ctest.out log_file=$BUILD_DIR/Testing/Temporary/LastTest.log
    (cd "$BUILD_DIR" && ctest --output-on-failure --no-tests=error -j "$JOBS" --timeout "$CTEST_TIMEOUT") 2>&1 |
        tee "$out" || rc=${PIPESTATUS[0]}
    # Test-case counts from Criterion's closing line in each suite's output
    # ("Synthesis: Tested: 3 | Passing: 1 | Failing: 2 | Crashing: 1"; Failing
    # includes Crashing, Tested excludes skipped tests).
    local suites=0 passed=0 failed=0 suites_failed=0
    if [[ -f $log_file ]]; then
        suites=$(grep -c 'Synthesis: Tested:' "$log_file" || true)
        passed=$(sed -n 's/.*Synthesis: Tested: [0-9]* | Passing: \([0-9]*\).*/\1/p' "$log_file" |
            awk '{n += $1} END {print n + 0}')
        failed=$(sed -n 's/.*Synthesis: Tested: .*| Failing: \([0-9]*\).*/\1/p' "$log_file" |
            awk '{n += $1} END {print n + 0}')
        # Criterion names skipped tests only with --verbose, so they are not counted.
    fi
    # A suite that died before printing its closing line still counts as a failure.
    suites_failed=$(sed -n 's/.* tests passed, \([0-9]*\) tests* failed out of .*/\1/p' "$out" | tail -n 1)
    suites_failed=${suites_failed:-0}
    ((suites_failed > failed)) && failed=$suites_failed
    count passed "$passed"
    count failed "$failed"
    note "$suites suites: $passed passed, $failed failed"
    if ((rc != 0)); then
        if grep -q 'No tests were found' "$out"; then
            note "no Criterion suite is registered (tests/test_*.c)"
        else
            note "$suites suites: $passed passed, $failed failed (ctest exit status $rc)"
        fi
        return "$rc"
    fi
}

stage_install() {
    cmake --install "$BUILD_DIR" --prefix "$PREFIX"
    # The installed tree holds the public headers only, and the shared library
    # exports only veer_ symbols.
    local f
    for f in "$REPO"/include/veer/*.h; do
        [[ -f $PREFIX/include/veer/$(basename "$f") ]] || { log "not installed: include/veer/$(basename "$f")"; return 1; }
    done
    if find "$PREFIX" -name 'internal.h' | grep -q .; then
        log "internal.h was installed"
        return 1
    fi
    local so
    so=$(find "$PREFIX" -name 'libveer.so.*' -type f | head -n 1)
    [[ -n $so ]] || { log "no libveer.so.* installed"; return 1; }
    local foreign
    foreign=$(nm -D --defined-only "$so" | awk '$2 ~ /^[TDBRVW]$/ {print $3}' | grep -v '^veer_' || true)
    if [[ -n $foreign ]]; then
        log "the shared library exports symbols without the veer_ prefix:"
        sed 's/^/  /' <<<"$foreign"
        return 1
    fi
    local internal
    internal=$(nm -D --defined-only "$so" | awk '{print $3}' | grep '^veer__' || true)
    if [[ -n $internal ]]; then
        log "the shared library exports internal veer__ symbols:"
        sed 's/^/  /' <<<"$internal"
        return 1
    fi
    [[ -n $(find "$PREFIX" -name veerConfig.cmake) ]] || { log "no veerConfig.cmake installed"; return 1; }
    [[ -n $(find "$PREFIX" -name veer.pc) ]] || { log "no veer.pc installed"; return 1; }
    note "$(nm -D --defined-only "$so" | grep -c ' T veer_') exported functions"
}

# The README's API example is examples/consumer/main.c after its header comment.
stage_readme_example() {
    local readme=$REPO/README.md main=$REPO/examples/consumer/main.c
    [[ -f $readme ]] || { note "no README.md"; return 1; }
    awk '/<!-- example: examples\/consumer\/main.c -->/ {m = 1; next}
         m == 1 && /^```c$/ {m = 2; next}
         m == 2 && /^```$/ {exit}
         m == 2 {print}' "$readme" >"$TMP_ROOT/readme_example.c"
    sed -n '/^#include <stdio.h>/,$p' "$main" >"$TMP_ROOT/main_body.c"
    [[ -s $TMP_ROOT/readme_example.c ]] || { note "README.md has no marked example block"; return 1; }
    if ! diff -u "$TMP_ROOT/main_body.c" "$TMP_ROOT/readme_example.c"; then
        note "README.md's API example differs from examples/consumer/main.c"
        return 1
    fi
    note "$(grep -c '' "$TMP_ROOT/readme_example.c") lines agree"
}

# The consumer example prints its figures and exits non-zero when planning fails.
run_consumer() {
    local exe=$1 out
    out=$("$exe") || { printf '%s\n' "$out"; log "$exe failed"; return 1; }
    printf '%s\n' "$out"
    grep -q '^duration ' <<<"$out" || { log "$exe printed no duration"; return 1; }
}

stage_consumer_cmake() {
    local dir=$BUILD_DIR/consumer-cmake
    fresh_dir "$dir"
    # Only the install prefix is visible: no source tree, no build tree.
    cmake -S "$REPO/examples/consumer" -B "$dir" -DCMAKE_PREFIX_PATH="$PREFIX" -DCONSUMER_WERROR=ON \
        -DCMAKE_FIND_USE_PACKAGE_REGISTRY=OFF
    cmake --build "$dir" -j "$JOBS"
    run_consumer "$dir/consumer"
}

stage_consumer_pkgconfig() {
    local dir=$BUILD_DIR/consumer-pkgconfig pcdir
    fresh_dir "$dir"
    pcdir=$(dirname "$(find "$PREFIX" -name veer.pc | head -n 1)")
    export PKG_CONFIG_PATH=$pcdir
    local prefix_seen
    prefix_seen=$(pkg-config --variable=prefix veer)
    # veer.pc names its prefix relative to itself (relocatable): compare the real paths
    if [[ $(realpath -m "$prefix_seen") != $(realpath -m "$PREFIX") ]]; then
        log "veer.pc says prefix=$prefix_seen, installed in $PREFIX"
        return 1
    fi
    # shellcheck disable=SC2046 # pkg-config prints a list of words
    cc "${CONSUMER_WARNINGS[@]}" "$REPO/examples/consumer/main.c" -o "$dir/consumer" \
        $(pkg-config --cflags --libs veer) -Wl,-rpath,"$(pkg-config --variable=libdir veer)"
    run_consumer "$dir/consumer"
    note "linked against $(ldd "$dir/consumer" | awk '/libveer/ {print $3}')"
}

stage_clang() {
    [[ ${VEER_CLANG:-1} == 0 ]] && skip "VEER_CLANG=0"
    local dir=$BUILD_DIR/clang
    fresh_dir "$dir"
    # shellcheck disable=SC2086
    CC=clang cmake -S "$REPO" -B "$dir" -DVEER_WERROR=ON ${VEER_CMAKE_ARGS:-}
    cmake --build "$dir" -j "$JOBS"
    note "$(clang --version | head -n 1)"
}

# The library as a cart's firmware may build it (VEER_TERSE_DIAG: messages
# are the status text; bench/size_arm.sh measures this build's code) and the
# suites of what a cart runs (drive, player with its receiver and decoder,
# controlled stop, jerk-limited playback, bad input); the tests expect the
# status text as the message there (tests/diag_text.h).
CART_SUITES="test_drive|test_link|test_player|test_stop|test_wire|test_jerk|test_plan_input"
stage_cart_terse() {
    local dir=$BUILD_DIR/terse out=$TMP_ROOT/terse.out rc=0
    fresh_dir "$dir"
    # shellcheck disable=SC2086 # VEER_CMAKE_ARGS is a list of words on purpose
    cmake -S "$REPO" -B "$dir" -DVEER_WERROR=ON -DVEER_TERSE_DIAG=ON -DVEER_BUILD_EXAMPLES=OFF ${VEER_CMAKE_ARGS:-}
    cmake --build "$dir" -j "$JOBS"
    (cd "$dir" && ctest --output-on-failure --no-tests=error -R "^($CART_SUITES)\$" -j "$JOBS" \
        --timeout "$CTEST_TIMEOUT") 2>&1 | tee "$out" || rc=${PIPESTATUS[0]}
    note "VEER_TERSE_DIAG: $(grep -E 'tests passed' "$out" | tail -n 1)"
    return "$rc"
}

# ---- hardening (issue 7): sanitizers, valgrind, fuzzing ----
# The whole C suite built with AddressSanitizer and UndefinedBehaviorSanitizer
# (gcc), the normal build's suite under valgrind memcheck, and a bounded run of
# each libFuzzer target (tests/fuzz/README.md has the longer run).

SANITIZE_FLAGS="-fsanitize=address,undefined -fno-sanitize-recover=all -fno-omit-frame-pointer"
VALGRIND_PROPERTY_CASES=100 # of test_property's 2000 cases: memcheck is ~40 times slower
VALGRIND_GARBAGE_ROUNDS=150 # of test_wire's 3000: 300 took ~200 s of its 300 s timeout and ran out on a busy machine
VALGRIND_TIMING_CASES=4   # of test_timing's 30..50 random cases per drive kind, for the same reason
FUZZ_TARGETS=(fuzz_plan_request fuzz_plan_decode fuzz_link_receiver)

stage_sanitize() {
    [[ ${VEER_HARDEN:-1} == 0 ]] && skip "VEER_HARDEN=0"
    local dir=$BUILD_DIR/sanitize out=$TMP_ROOT/sanitize.out rc=0 reports
    fresh_dir "$dir"
    # shellcheck disable=SC2086 # VEER_CMAKE_ARGS is a list of words on purpose
    cmake -S "$REPO" -B "$dir" -DVEER_WERROR=ON -DVEER_BUILD_EXAMPLES=OFF -DCMAKE_C_FLAGS="$SANITIZE_FLAGS" \
        -DCMAKE_EXE_LINKER_FLAGS="-fsanitize=address,undefined" \
        -DCMAKE_SHARED_LINKER_FLAGS="-fsanitize=address,undefined" ${VEER_CMAKE_ARGS:-}
    cmake --build "$dir" -j "$JOBS"
    (cd "$dir" && ASAN_OPTIONS=detect_leaks=1:halt_on_error=1:detect_stack_use_after_return=1 \
        UBSAN_OPTIONS=print_stacktrace=1:halt_on_error=1 \
        ctest --output-on-failure --no-tests=error -j "$JOBS" --timeout "$CTEST_TIMEOUT") 2>&1 |
        tee "$out" || rc=${PIPESTATUS[0]}
    reports=$(grep -cE 'ERROR: (AddressSanitizer|LeakSanitizer)|runtime error:' "$out" || true)
    note "$(cc --version | head -n 1 | sed 's/ (.*)//'): $reports sanitizer reports; $(grep -E 'tests passed' "$out" | tail -n 1)"
    ((reports == 0)) || return 1
    return "$rc"
}

# One suite under memcheck. Criterion runs each test in a child process whose
# exit code does not reach its verdict, so every process writes its own log
# and a log with errors fails the suite. No suppressions.
valgrind_suite() {
    local exe=$1 logs=$2 name rc=0
    name=$(basename "$exe")
    VEER_PROPERTY_CASES=$VALGRIND_PROPERTY_CASES VEER_GARBAGE_ROUNDS=$VALGRIND_GARBAGE_ROUNDS VEER_TIMING_CASES=$VALGRIND_TIMING_CASES timeout "$CTEST_TIMEOUT" valgrind --error-exitcode=99 \
        --leak-check=full --errors-for-leak-kinds=definite,indirect --show-leak-kinds=definite,indirect \
        --track-origins=yes --trace-children=yes --log-file="$logs/$name.%p.log" "$exe" --jobs 1 \
        >"$logs/$name.out" 2>&1 || rc=$?
    echo "$rc" >"$logs/$name.rc"
}

# The failed tests in a Criterion output file (run with --jobs 1, so a test's
# lines come together), one per line: "suite::test<TAB>first message", where
# the message is the first failed assertion's place and text ("t.c:6: a is
# 1"), or where a crash was caught. Tests that ran into their Criterion
# timeout are left out (valgrind_timeouts lists them). Criterion 2.4 prints
#   [----] t.c:6: Assertion Failed / [----]   (blank) / [----]   text / ...
#   [----] t.c:8: Unexpected signal caught below this line!
#   [FAIL] suite::test: (0.00s) | CRASH! | Timed out. (1.01s)
criterion_failures() {
    awk '
        /^\[----\] / {
            line = substr($0, 8)
            if (first == "" && !want && line ~ /: Assertion Failed$/) {
                where = line; sub(/: Assertion Failed$/, "", where); want = 1
            } else if (first == "" && !want && line ~ /: Unexpected signal caught below this line!$/) {
                first = line; sub(/: Unexpected signal caught below this line!$/, "", first)
                first = "CRASH: a signal after " first " (the last assertion reached, or the start of the test)"
            } else if (want && line !~ /^[[:space:]]*$/) {
                sub(/^[[:space:]]+/, "", line); first = where ": " line; want = 0
            }
            next
        }
        /^\[FAIL\] / {
            rest = substr($0, 8); name = rest; sub(/: .*/, "", name)
            verdict = rest; sub(/^[^ ]*: /, "", verdict)
            if (verdict !~ /^Timed out/) {
                if (first == "") first = (want ? where ": (no message)" : verdict)
                print name "\t" first
            }
            first = ""; want = 0
        }' "$1"
}

# The tests in a Criterion output file that ran into their timeout.
valgrind_timeouts() { sed -n 's/^\[FAIL\] \(.*\): Timed out.*/\1/p' "$1"; }

# Every suite under memcheck, with test_property, test_wire's random bytes and
# test_timing cut down (VALGRIND_* above). It fails on memory errors, on a
# suite that did not finish, and on any failed test (assertion or crash),
# except a test that ran into its Criterion timeout under memcheck's slowdown:
# that one is listed, not failed (memcheck saw everything it ran until then).
stage_valgrind() {
    [[ ${VEER_HARDEN:-1} == 0 ]] && skip "VEER_HARDEN=0"
    command -v valgrind >/dev/null 2>&1 || { note "valgrind is not installed"; return 1; }
    local logs=$BUILD_DIR/valgrind exe name bad line running=0 memfail=() unfinished=() slow=() testfail=()
    local tname msg listed failing timeouts
    rm -rf "$logs" && mkdir -p "$logs"
    local suites=("$BUILD_DIR"/tests/test_*)
    [[ -x ${suites[0]} ]] || { note "no test executables in $BUILD_DIR/tests"; return 1; }
    for exe in "${suites[@]}"; do
        valgrind_suite "$exe" "$logs" &
        running=$((running + 1))
        if ((running >= JOBS)); then
            wait -n || true
            running=$((running - 1))
        fi
    done
    wait || true
    for exe in "${suites[@]}"; do
        name=$(basename "$exe")
        bad=$(grep -l 'ERROR SUMMARY: [1-9]' "$logs/$name".*.log 2>/dev/null | head -n 1 || true)
        if [[ -n $bad || $(cat "$logs/$name.rc" 2>/dev/null) == 99 ]]; then
            memfail+=("$name")
            log "valgrind: $name: memory errors; the first, from $bad:"
            grep -A 14 -m 1 -E '^==[0-9]+== (Invalid|Conditional|Use of|Mismatched|Syscall|[0-9,]+ \(?[0-9,]* ?\)?bytes)' "$bad" || true
        fi
        if ! grep -q 'Synthesis: Tested' "$logs/$name.out"; then
            unfinished+=("$name")
            log "valgrind: $name did not finish (see $logs/$name.out)"
        fi
        while read -r line; do
            slow+=("$line")
        done < <(valgrind_timeouts "$logs/$name.out")
        listed=0
        while IFS=$'\t' read -r tname msg; do
            testfail+=("$tname")
            listed=$((listed + 1))
            log "valgrind: $name: FAILED under memcheck: $tname: $msg"
        done < <(criterion_failures "$logs/$name.out")
        # Criterion's closing line counts failures (timeouts and crashes
        # included); one that printed no [FAIL] line still fails the stage.
        failing=$(sed -n 's/.*Synthesis: Tested: .*| Failing: \([0-9]*\).*/\1/p' "$logs/$name.out" | tail -n 1)
        timeouts=$(valgrind_timeouts "$logs/$name.out" | grep -c . || true)
        if ((${failing:-0} - timeouts > listed)); then
            testfail+=("$name:$((failing - timeouts - listed))-unnamed")
            log "valgrind: $name: Criterion counts $failing failing tests, $timeouts timed out, $listed named above"
        fi
        log "valgrind: $name: $(grep -h 'Synthesis' "$logs/$name.out" | sed 's/.*Synthesis: //')"
    done
    ((${#slow[@]} == 0)) || log "valgrind: timed out under memcheck (not counted as failures): ${slow[*]}"
    ((${#testfail[@]} == 0)) || log "valgrind: failed under memcheck (output in $logs/<suite>.out): ${testfail[*]}"
    note "${#suites[@]} suites under memcheck (cut down: $VALGRIND_PROPERTY_CASES property cases, $VALGRIND_GARBAGE_ROUNDS garbage rounds, $VALGRIND_TIMING_CASES timing cases): ${#memfail[@]} with memory errors${memfail:+ (${memfail[*]})}, ${#unfinished[@]} unfinished${unfinished:+ (${unfinished[*]})}, ${#testfail[@]} tests failed${testfail:+ (${testfail[*]})}, ${#slow[@]} timed out (not counted)${slow:+ (${slow[*]})}"
    ((${#memfail[@]} == 0 && ${#unfinished[@]} == 0 && ${#testfail[@]} == 0))
}

stage_fuzz() {
    [[ ${VEER_HARDEN:-1} == 0 ]] && skip "VEER_HARDEN=0"
    command -v clang >/dev/null 2>&1 || { note "clang is not installed"; return 1; }
    local dir=$BUILD_DIR/fuzz art=$BUILD_DIR/fuzz-artifacts secs=${VEER_FUZZ_SECONDS:-20}
    local seed=${VEER_FUZZ_SEED:-1} # fixed, so a CI run repeats; 0 lets libFuzzer pick (exploration)
    local t f rc open=() crashed=() stats=""
    fresh_dir "$dir"
    rm -rf "$art" && mkdir -p "$art"
    CC=clang cmake -S "$REPO" -B "$dir" -DVEER_FUZZ=ON -DVEER_BUILD_TESTS=OFF -DVEER_BUILD_EXAMPLES=OFF -DVEER_WERROR=ON
    cmake --build "$dir" -j "$JOBS"
    for t in "${FUZZ_TARGETS[@]}"; do
        # Findings (tests/fuzz/findings/<target>/) fail until they are fixed,
        # and again if they come back (a slow one: over 10 s).
        for f in "$REPO/tests/fuzz/findings/$t"/*; do
            [[ -f $f ]] || continue
            if ! "$dir/tests/fuzz/$t" -timeout=10 "$f" >"$art/$t.$(basename "$f").log" 2>&1; then
                open+=("$t/$(basename "$f")")
                log "fuzz: open finding $t/$(basename "$f") still fails: $(grep -m 1 -E 'fuzz finding|runtime error|ERROR:' "$art/$t.$(basename "$f").log" || true)"
            fi
        done
        # A bounded run from the committed seeds; new inputs stay in the build tree.
        mkdir -p "$dir/corpus/$t"
        rc=0
        (cd "$art" && "$dir/tests/fuzz/$t" -max_total_time="$secs" -timeout=10 -rss_limit_mb=2048 -seed="$seed" \
            -artifact_prefix="$art/$t-" -print_final_stats=1 "$dir/corpus/$t" "$REPO/tests/fuzz/corpus/$t") \
            >"$art/$t.log" 2>&1 || rc=$?
        grep -E '^#[0-9]+ +DONE|fuzz finding|runtime error|ERROR: ' "$art/$t.log" | head -n 5 || true
        stats+=" $t $(grep -oE 'stat::number_of_executed_units: [0-9]+' "$art/$t.log" | awk '{print $2}') runs;"
        if ((rc != 0)); then
            crashed+=("$t")
            log "fuzz: $t found a failing input: $(find "$art" -name "$t-*" | head -n 1)"
        fi
    done
    note "$secs s per target:$stats new findings: ${#crashed[@]}${crashed:+ (${crashed[*]})}; open findings still failing: ${#open[@]}"
    ((${#crashed[@]} == 0 && ${#open[@]} == 0))
}
# ---- end hardening ----

stage_bench() {
    [[ ${VEER_BENCH:-0} == 1 ]] || skip "set VEER_BENCH=1 to run"
    local exe=$BUILD_DIR/examples/bench_plan
    [[ -x $exe ]] || skip "no $exe"
    timeout "$BENCH_TIMEOUT" "$exe"
}

stage_pytest() {
    [[ -d $REPO/tests/python ]] || skip "no tests/python"
    find "$REPO/tests/python" -name 'test_*.py' | grep -q . || skip "no tests/python/test_*.py yet"
    local out=$TMP_ROOT/pytest.out rc=0
    # The binding loads the library named by VEER_LIBRARY (bindings/python/veer/_lib.py);
    # matplotlib draws off-screen.
    export VEER_BUILD_DIR="$BUILD_DIR"
    export VEER_LIBRARY="$BUILD_DIR/libveer.so"
    export PYTHONPATH="$REPO/bindings/python${PYTHONPATH:+:$PYTHONPATH}"
    export MPLBACKEND=Agg
    (cd "$REPO" && timeout "$PYTEST_TIMEOUT" "$PYTHON" -m pytest -q -p no:cacheprovider tests/python) 2>&1 | tee "$out" || rc=${PIPESTATUS[0]}
    local line n word
    line=$(grep -E '^[=[:space:]]*[0-9]+ (passed|failed|skipped|error)' "$out" | tail -n 1 || true)
    for word in passed failed skipped error errors; do
        n=$(grep -oE "[0-9]+ $word\b" <<<"$line" | awk '{print $1}' | head -n 1 || true)
        [[ -n $n ]] || continue
        case $word in error | errors) count failed "$n" ;; *) count "$word" "$n" ;; esac
    done
    note "${line//=/}"
    case $rc in
    0) ;;
    5) note "tests/python exists but pytest collected no tests"; return 1 ;;
    124) note "pytest ran longer than $PYTEST_TIMEOUT s"; return 1 ;;
    *) return "$rc" ;;
    esac
}

# ---- main ------------------------------------------------------------------

summary() {
    local i name verdict=PASS passed=0 failed=0 skipped=0 kind n
    printf '\n======== summary (%d s) ========\n' "$SECONDS"
    for i in "${!STAGES[@]}"; do
        name=${STAGES[$i]}
        printf '  %-20s %-8s %5s s  %s\n' "$name" "${RESULT[$name]}" "${TIMES[$i]}" "${NOTES[$i]}"
        case ${RESULT[$name]} in FAIL | "NOT RUN") verdict=FAIL ;; esac
    done
    while read -r kind n; do
        case $kind in
        passed) passed=$((passed + n)) ;;
        failed) failed=$((failed + n)) ;;
        skipped) skipped=$((skipped + n)) ;;
        esac
    done <"$COUNT_FILE"
    if [[ $verdict == PASS ]]; then
        echo "RESULT: PASS"
    else
        echo "RESULT: FAIL (see the stages marked FAIL above)"
    fi
    # Test cases run by Criterion and pytest, on a line of their own.
    echo "tests: $passed passed, $failed failed, $skipped skipped"
    [[ $verdict == PASS ]]
}

main() {
    cd "$REPO"
    log "repo $REPO, build dir $BUILD_DIR, $JOBS jobs"
    run_stage deps stage_deps
    log "$( (cc --version | head -n 1; cmake --version | head -n 1) 2>&1 | paste -sd ';' -)"
    run_stage configure stage_configure deps
    run_stage build stage_build configure
    run_stage ctest stage_ctest build
    run_stage install stage_install build
    run_stage readme-example stage_readme_example
    run_stage consumer-cmake stage_consumer_cmake install
    run_stage consumer-pkgconfig stage_consumer_pkgconfig install
    run_stage clang-werror stage_clang build
    run_stage cart-terse stage_cart_terse deps
    run_stage sanitize stage_sanitize deps
    run_stage valgrind stage_valgrind build
    run_stage fuzz stage_fuzz deps
    run_stage bench stage_bench build
    run_stage pytest stage_pytest build
    summary
}

# Sourced (for one stage on an existing build, DEVELOPERS.md), only the
# functions and settings are defined.
if [[ ${BASH_SOURCE[0]} == "$0" ]]; then
    main "$@"
fi
