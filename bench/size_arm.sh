#!/usr/bin/env bash
# Cart-side code size on a Cortex-M7 (Thumb-2, double-precision FPU), the kind
# of controller a cart might carry: compiles src/*.c and the generated nanopb
# messages with arm-none-eabi-gcc at -Os, links bench/cart_min.c against them
# with --gc-sections (newlib-nano) and sums, from the map, what veer kept
# (bench/size.py's parser). Debian ships nanopb's runtime (pb_decode,
# pb_encode, pb_common) built for the host only; give its source to count it
# too, compiled for the target with the same flags (without Debian's
# PB_ENABLE_MALLOC: the cart allocates nothing). Without it the runtime's
# symbols are left unresolved and it is not counted.
#
#   bench/size_arm.sh [BUILD_DIR]    a configured build tree (for the generated
#                                    messages); default /tmp/veer-bench-os
#   VEER_TERSE_DIAG=1 bench/size_arm.sh   the same with VEER_TERSE_DIAG
#   NANOPB_SRC=DIR bench/size_arm.sh      count nanopb's runtime from DIR/pb_*.c,
#       e.g. the Debian source package: add deb-src to the apt sources, then
#       (cd /tmp && apt-get source nanopb); NANOPB_SRC=/tmp/nanopb-0.4.7
#
# Needs Debian's gcc-arm-none-eabi and libnewlib-arm-none-eabi (not in the
# test command's package list: this is an optional measurement).
set -euo pipefail

REPO=$(cd "$(dirname "${BASH_SOURCE[0]}")/.." && pwd)
BUILD=${1:-/tmp/veer-bench-os}
PYTHON=/usr/bin/python3
command -v arm-none-eabi-gcc >/dev/null || {
    echo "size_arm.sh: arm-none-eabi-gcc not found (apt-get install gcc-arm-none-eabi libnewlib-arm-none-eabi)" >&2
    exit 1
}
[[ -f $BUILD/pb/veer/v1/plan.pb.c ]] || {
    echo "size_arm.sh: $BUILD has no generated messages: run bench/run.sh or configure and build it first" >&2
    exit 1
}
NANOPB_INC=$(sed -n 's/^VEER_NANOPB_INCLUDE_DIR:PATH=//p' "$BUILD/CMakeCache.txt")
OUT=$(mktemp -d)
trap 'rm -rf "$OUT"' EXIT
mkdir "$OUT/inc"
cp "$NANOPB_INC"/pb.h "$NANOPB_INC"/pb_common.h "$NANOPB_INC"/pb_decode.h "$NANOPB_INC"/pb_encode.h "$OUT/inc/"
FLAGS=(-std=c11 -Os -mthumb -mcpu=cortex-m7 -mfpu=fpv5-d16 -mfloat-abi=hard -ffunction-sections -fdata-sections
    -DNDEBUG -I"$REPO/include" -I"$REPO/src" -I"$BUILD/pb" -I"$OUT/inc")
[[ ${VEER_TERSE_DIAG:-0} == 1 ]] && FLAGS+=(-DVEER_TERSE_DIAG)
SOURCES=("$REPO"/src/*.c "$BUILD"/pb/veer/v1/*.pb.c)
if [[ -n ${NANOPB_SRC:-} ]]; then
    for f in pb_decode pb_encode pb_common; do
        [[ -f $NANOPB_SRC/$f.c ]] || { echo "size_arm.sh: no $f.c in $NANOPB_SRC" >&2; exit 1; }
        SOURCES+=("$NANOPB_SRC/$f.c")
    done
fi
for f in "${SOURCES[@]}"; do
    arm-none-eabi-gcc "${FLAGS[@]}" -c "$f" -o "$OUT/$(basename "$f").o"
done
arm-none-eabi-ar rcs "$OUT/libveer.a" "$OUT"/*.o
UNRESOLVED=(-Wl,--unresolved-symbols=ignore-all) # nanopb's runtime, when its source is not given
[[ -n ${NANOPB_SRC:-} ]] && UNRESOLVED=()
arm-none-eabi-gcc "${FLAGS[@]}" "$REPO/bench/cart_min.c" "$OUT/libveer.a" --specs=nano.specs --specs=nosys.specs \
    -Wl,--gc-sections -Wl,-Map="$OUT/cart.map" "${UNRESOLVED[@]}" -lm -o "$OUT/cart.elf"
"$PYTHON" - "$OUT/cart.map" "${VEER_TERSE_DIAG:-0}" "$REPO/bench" "${NANOPB_SRC:+1}" <<'EOF'
import collections, sys
sys.path.insert(0, sys.argv[3])
import size
sizes = {k: v for k, v in size.parse(sys.argv[1]).items() if k[0] == "libveer.a"}
runtime = len(sys.argv) > 4 and sys.argv[4] == "1"
print("### Cart-side code on a Cortex-M7 (arm-none-eabi-gcc -Os -mthumb%s; nanopb runtime %s)\n"
      % (", VEER_TERSE_DIAG" if sys.argv[2] == "1" else "",
         "compiled from its source and counted" if runtime else "not counted"))
print("| object | code (text + rodata) B | static RAM (data + bss) B |\n|---|---|---|")
tot = collections.Counter()
for (a, m), c in sorted(sizes.items(), key=lambda kv: -kv[1]["code"]):
    print("| %s | %d | %d |" % (m.replace(".c.o", ".c"), c["code"], c["ram"]))
    tot.update(c)
print("| **veer + %s, total** | **%d (%.1f KiB)** | **%d** |"
      % ("nanopb" if runtime else "generated messages", tot["code"], tot["code"] / 1024, tot["ram"]))
if runtime:  # bench/run.sh's targets table reads this
    print("\nsummary code_bytes_m7%s %d" % ("_terse" if sys.argv[2] == "1" else "", tot["code"]))
EOF
