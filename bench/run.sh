#!/usr/bin/env bash
# veer's benchmark command: builds the library (its own build directory,
# RelWithDebInfo = -O2, with -ffunction-sections -fdata-sections for the size
# figures) and the benchmark programs, then prints markdown tables:
#   planning time against scipy's HiGHS on the identical LP (bench/bench.py lp),
#   scaling with grid size, route length and module count (bench_cart scaling),
#   cart side: player step time, stack, memory, code and static RAM size
#   (-O2, -Os, and -Os with VEER_TERSE_DIAG as a firmware might be built),
#   encoded plan size and airtime against the dense 50 Hz setpoint stream,
#   the time a user saves against a careful conventional plan.
#
#   bench/run.sh            print the tables
#   bench/run.sh --write    also write them to bench/RESULTS.md, and the targets table into README.md
#
# Environment: VEER_BENCH_BUILD (default /tmp/veer-bench), VEER_BENCH_RATE
# (radio air rate in bit/s for the airtime, default 9600), NANOPB_SRC (nanopb's
# source, for the Cortex-M7 code figures of bench/size_arm.sh: needs
# arm-none-eabi-gcc; without both, the code target is judged on x86-64 -Os).
# Figures are wall-clock on this machine; run it on an otherwise idle one.
set -euo pipefail

REPO=$(cd "$(dirname "${BASH_SOURCE[0]}")/.." && pwd)
BUILD=${VEER_BENCH_BUILD:-/tmp/veer-bench}
RATE=${VEER_BENCH_RATE:-9600}
PYTHON=/usr/bin/python3 # Debian's python3, with numpy and scipy
WRITE=0
[[ ${1:-} == --write ]] && WRITE=1

cmake -S "$REPO" -B "$BUILD" -DCMAKE_BUILD_TYPE=RelWithDebInfo -DVEER_BUILD_TESTS=OFF -DVEER_BUILD_EXAMPLES=OFF \
    -DCMAKE_C_FLAGS="-ffunction-sections -fdata-sections" >"$BUILD.cmake.log" 2>&1 ||
    { cat "$BUILD.cmake.log"; exit 1; }
cmake --build "$BUILD" -j "$(nproc)" >"$BUILD.build.log" 2>&1 || { tail -n 40 "$BUILD.build.log"; exit 1; }
# The same library at -Os (MinSizeRel), for the code size a cart's firmware would see.
cmake -S "$REPO" -B "$BUILD-os" -DCMAKE_BUILD_TYPE=MinSizeRel -DVEER_BUILD_TESTS=OFF -DVEER_BUILD_EXAMPLES=OFF \
    -DCMAKE_C_FLAGS="-ffunction-sections -fdata-sections" >"$BUILD-os.cmake.log" 2>&1 ||
    { cat "$BUILD-os.cmake.log"; exit 1; }
cmake --build "$BUILD-os" -j "$(nproc)" --target veer_static >"$BUILD-os.build.log" 2>&1 ||
    { tail -n 40 "$BUILD-os.build.log"; exit 1; }
# And at -Os with VEER_TERSE_DIAG (diagnostics without message text), as a cart's firmware may be built.
cmake -S "$REPO" -B "$BUILD-os-terse" -DCMAKE_BUILD_TYPE=MinSizeRel -DVEER_BUILD_TESTS=OFF -DVEER_BUILD_EXAMPLES=OFF \
    -DVEER_TERSE_DIAG=ON -DCMAKE_C_FLAGS="-ffunction-sections -fdata-sections" >"$BUILD-os-terse.cmake.log" 2>&1 ||
    { cat "$BUILD-os-terse.cmake.log"; exit 1; }
cmake --build "$BUILD-os-terse" -j "$(nproc)" --target veer_static >"$BUILD-os-terse.build.log" 2>&1 ||
    { tail -n 40 "$BUILD-os-terse.build.log"; exit 1; }
NANOPB_INC=$(sed -n 's/^VEER_NANOPB_INCLUDE_DIR:PATH=//p' "$BUILD/CMakeCache.txt")
cc -std=c11 -O2 -Wall -Wextra -Werror -I"$REPO/include" -I"$REPO/src" -I"$REPO/examples" -I"$BUILD/pb" \
    -I"$NANOPB_INC" "$REPO/bench/bench_cart.c" "$BUILD/libveer.a" -lm -lpthread -o "$BUILD/bench_cart"

OUT=$(mktemp -d)
trap 'rm -rf "$OUT"' EXIT
# Each part into a file of its own; "summary KEY VALUE ..." lines feed the targets table.
"$PYTHON" "$REPO/bench/bench.py" lp "$BUILD" >"$OUT/lp.md"
"$BUILD/bench_cart" scaling >"$OUT/scaling.md"
# Instructions per plan (callgrind, inside veer_plan_create only): the same
# on a busy machine as on an idle one, unlike the times.
instructions() { # instructions N
    valgrind --tool=callgrind --toggle-collect=veer_plan_create --callgrind-out-file=/dev/null \
        "$BUILD/bench_cart" once "$1" 2>&1 >/dev/null | awk '/Collected :/ {print $NF}'
}
if command -v valgrind >/dev/null 2>&1; then
    {
        echo "### Instructions per plan (demo route, callgrind, veer_plan_create only)"
        echo
        echo "| grid points asked | instructions | per grid point | cost / cost at 1000 |"
        echo "|---|---|---|---|"
        i1000=$(instructions 1000)
        for n in 250 1000 4000 16000; do
            i=$([[ $n == 1000 ]] && echo "$i1000" || instructions "$n")
            awk -v n="$n" -v i="$i" -v b="$i1000" 'BEGIN {printf "| %d | %.2f M | %.0f | %.2f |\n", n, i / 1e6, i / n, i / b}'
            [[ $n == 16000 ]] && awk -v i="$i" -v b="$i1000" 'BEGIN {printf "\nsummary instr_16000_over_1000 %.2f\n", i / b}'
        done
    } >"$OUT/instr.md"
else
    printf 'valgrind is not installed: no instruction counts.\n\nsummary instr_16000_over_1000 n/a\n' >"$OUT/instr.md"
fi
"$BUILD/bench_cart" player >"$OUT/player.md"
"$PYTHON" "$REPO/bench/size.py" "$BUILD" >"$OUT/size.md"
"$PYTHON" "$REPO/bench/size.py" "$BUILD-os" cc -Os >"$OUT/size_os.md"
"$PYTHON" "$REPO/bench/size.py" "$BUILD-os-terse" cc -Os >"$OUT/size_os_terse.md"
# Code on a Cortex-M7, when the cross compiler and nanopb's source are here (bench/size_arm.sh).
if command -v arm-none-eabi-gcc >/dev/null 2>&1 && [[ -f ${NANOPB_SRC:-/nonexistent}/pb_decode.c ]]; then
    NANOPB_SRC=$NANOPB_SRC "$REPO/bench/size_arm.sh" "$BUILD-os" >"$OUT/size_m7.md"
    VEER_TERSE_DIAG=1 NANOPB_SRC=$NANOPB_SRC "$REPO/bench/size_arm.sh" "$BUILD-os" >"$OUT/size_m7_terse.md"
else
    printf 'No Cortex-M7 figures: bench/size_arm.sh needs arm-none-eabi-gcc and NANOPB_SRC (see there).\n' >"$OUT/size_m7.md"
    : >"$OUT/size_m7_terse.md"
fi
"$BUILD/bench_cart" stack >"$OUT/stack.txt"
"$BUILD/bench_cart" wire "$RATE" >"$OUT/wire.md"
"$PYTHON" "$REPO/bench/bench.py" conventional "$BUILD" >"$OUT/conventional.md"

fig() { # fig KEY: the value after KEY on a summary line (or in stack.txt)
    # awk reads to the end (an early exit would kill cat by SIGPIPE, which
    # pipefail and set -e turn into a silent stop of this script)
    awk -v k="$1" '!found {for (i = 1; i < NF; i++) if ($i == k) {print $(i + 1); found = 1; break}}' \
        "$OUT"/*.md "$OUT/stack.txt"
}
verdict() { # verdict OK?: met / missed
    if [[ $1 == 1 ]]; then echo met; else echo "**missed**"; fi
}
ratio=$(fig lp_ratio_1000) diff=$(fig lp_diff_1000) scale=$(fig scale_16000_over_1000) step=$(fig step_mean_us)
ratio_med=$(fig lp_ratio_1000_median) scale_med=$(fig "(medians:" | tr -d ')') instr=$(fig instr_16000_over_1000)
p99=$(fig step_p99_us) code=$(fig code_bytes) ram=$(fig ram_bytes)
code_os=$(fig code_bytes_Os) code_terse=$(fig code_bytes_Os_terse)
stack=$(fig stack_high_water_bytes) mem=$(fig player_size_demo_bytes) libc_stack=$(fig stack_thread_overhead_bytes)
own_stack=$((stack - libc_stack)) # veer's own: the thread start's share is the C library's
mem_patrol=$(fig player_size_patrol_bytes) mem_cart=$(fig player_size_cart_bytes) mem_any=$(fig player_size_bytes)
ok() { awk "BEGIN {print ($1) ? 1 : 0}"; }
m7=$(fig code_bytes_m7) m7_terse=$(fig code_bytes_m7_terse)
kib() { awk "BEGIN {printf \"%.1f\", $1 / 1024}"; }
if [[ -n $m7_terse ]]; then # the cart's own build: a Cortex-M controller, terse diagnostics
    code_row="Cortex-M7 -Os with VEER_TERSE_DIAG (a cart's firmware): $m7_terse B ($(kib "$m7_terse") KiB); with full messages: $m7 B ($(kib "$m7") KiB); x86-64 -O2: $code B ($(kib "$code") KiB), -Os: $code_os B ($(kib "$code_os") KiB), -Os terse: $code_terse B ($(kib "$code_terse") KiB); nanopb runtime and HMAC-SHA-256 included, C library and libm not"
    code_ok=$(ok "$m7_terse < 49152")
else
    code_row="-O2: $code B ($(kib "$code") KiB); -Os: $code_os B ($(kib "$code_os") KiB); -Os with VEER_TERSE_DIAG: $code_terse B ($(kib "$code_terse") KiB); HMAC-SHA-256 included (no Cortex-M7 figure: see bench/size_arm.sh)"
    code_ok=$(ok "$code_os < 49152")
fi

{
    echo "# veer benchmark results"
    echo
    echo "Made by \`bench/run.sh\` on $(date -u +%Y-%m-%d): veer $(sed -n 's/.*VEER_VERSION_STRING "\(.*\)".*/\1/p' "$REPO/include/veer/version.h")" \
        "(commit $(git -C "$REPO" rev-parse --short HEAD 2>/dev/null || echo unknown)), $(cc --version | head -n 1 | sed 's/ (.*)//'), -O2," \
        "$(lscpu 2>/dev/null | sed -n 's/^Model name: *//p' | head -n 1), $(nproc) cores."
    echo "Regenerate: \`bench/run.sh --write\` (prints the same tables; needs Debian's python3-scipy)."
    echo
    echo "## Targets (issue 7)"
    echo
    echo "| target | measured | |"
    echo "|---|---|---|"
    echo "| at 1000 grid points, at least 200 times faster than HiGHS | $ratio times (best against best; medians: $ratio_med) | $(verdict "$(ok "$ratio >= 200")") |"
    echo "| ... with the duration within 0.2 % of the LP optimum | ${diff} % | $(verdict "$(ok "$diff <= 0.2 && $diff >= -0.2")") |"
    echo "| time linear in N: 16000 grid points cost at most 20 times 1000 | $scale times (best runs; medians: $scale_med; instructions: $instr) | $(verdict "$(ok "$scale <= 20")") |"
    echo "| player step under 1 us for a 4-module cart | mean $step us, 99th percentile $p99 us | $(verdict "$(ok "$step < 1")") |"
    echo "| receiver + player + decoder under 48 KiB of code | $code_row | $(verdict "$code_ok") |"
    echo "| ... and under 16 KiB of RAM | static $ram B; stack $own_stack B (high-water $stack B, $libc_stack B of it the C library's thread start); player memory (caller's) for a cart sized for the demo plan $mem B (for the 5-minute patrol $mem_patrol B; for any plan on 4 modules $mem_cart B); static + stack + player memory $((ram + own_stack + mem)) B | $(verdict "$(ok "$ram + $own_stack + $mem < 16384")") (static RAM alone: $(verdict "$(ok "$ram < 16384")")) |"
    echo
    for part in lp scaling instr player size size_os size_os_terse size_m7 size_m7_terse; do
        sed '/^summary /d' "$OUT/$part.md"
        echo
    done
    echo "### Cart-side memory"
    echo
    awk '
        /stack_high_water_bytes/ {printf "- stack high-water mark of the cart loop (a cart sized for the demo plan: the plan'"'"'s frames, START, 50 Hz steps with heartbeats and reports until the link goes quiet while moving and the watchdog brakes the cart to a controlled stop; the frame and setpoint buffers are the caller'"'"'s, static): %d B (%.1f KiB)\n", $2, $2 / 1024}
        /stack_thread_overhead_bytes/ {printf "  (of which %d B are the C library'"'"'s: the same measure for a thread that returns at once)\n", $2}
        /player_size_bytes/ {printf "- veer_player_size(): %d B (%.1f KiB), the memory a player for any plan on 8 modules needs (a plan workspace, a copy of the armed plan bytes and the receiver; the caller gives it)\n", $2, $2 / 1024}
        /player_size_cart_bytes/ {printf "- veer_player_size_for() the demo cart (4 modules) for any plan: %d B (%.1f KiB)\n", $2, $2 / 1024}
        /player_size_demo_bytes/ {printf "- ... sized for the demo plan (%d plan bytes, %d knots, %d waypoints, %d legs): %d B (%.1f KiB)\n", $4, $6, $8, $10, $2, $2 / 1024}
        /player_size_patrol_bytes/ {printf "- ... sized for the 5-minute patrol (%d plan bytes, %d knots, %d waypoints, %d legs): %d B (%.1f KiB)\n", $4, $6, $8, $10, $2, $2 / 1024}
        /arm_demo_us/ {printf "- arming the demo plan (the frame that completes it: tag, decode, checks), best of 50: %.1f us\n", $2}
        /receiver_size_bytes/ {printf "- veer_link_receiver_size(): %d B (%.1f KiB)\n", $2, $2 / 1024}
        /plan_workspace_bytes/ {printf "- veer_plan_workspace_size(): %d B (%.1f KiB); veer_plan_sample_pb puts one on the stack\n", $2, $2 / 1024}' "$OUT/stack.txt"
    echo
    cat "$OUT/wire.md"
    echo
    echo "Airtime is bytes x 8 / $RATE bit/s (an assumed sub-GHz telemetry air rate), frames included, no"
    echo "retransmissions. The dense streams are cut into frames with the plan's per-frame overhead."
    echo
    sed '/^summary /d' "$OUT/conventional.md"
} >"$OUT/RESULTS.md"
cat "$OUT/RESULTS.md"

if ((WRITE)); then
    cp "$OUT/RESULTS.md" "$REPO/bench/RESULTS.md"
    echo "wrote $REPO/bench/RESULTS.md" >&2
    # The README shows the targets table between its two bench markers.
    "$PYTHON" - "$OUT/RESULTS.md" "$REPO/README.md" <<'PY'
import re, sys
results, readme = (open(p).read() for p in sys.argv[1:3])
table = re.search(r"^\| target \|.*?(?=\n\n)", results, re.S | re.M).group(0)
head = re.search(r"^Made by .*$", results, re.M).group(0)
new, n = re.subn(r"(<!-- bench targets -->\n)(?:.*?\n)?(<!-- /bench targets -->)",
                 lambda m: m.group(1) + head + "\n\n" + table + "\n" + m.group(2), readme, flags=re.S)
if n == 1:
    open(sys.argv[2], "w").write(new)
    print("updated the targets table in " + sys.argv[2], file=sys.stderr)
else:
    print("README.md has no bench targets markers: not updated", file=sys.stderr)
PY
fi
