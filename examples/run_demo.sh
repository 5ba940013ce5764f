#!/usr/bin/env bash
# veer demo (the README's first command): installs what a fresh Debian 12
# machine lacks, builds the library and the examples, plans the invented
# Kestrel Flats range scenario in C (examples/demo.c: the plan's duration,
# each leg's time, the share of the path each limit binds, peak module
# figures against their limits), then plans the same scenario from its JSON
# file with the Python command-line tool and draws the figure
# (build/demo/kestrel_flats_lane4_demo.png).
#
# CAUTION: veer's planner is not a safety-rated function. A hardware emergency
# stop, the range's safety rules and its range safety officer always come first.
set -euo pipefail
REPO=$(cd "$(dirname "${BASH_SOURCE[0]}")/.." && pwd)
BUILD_DIR=${VEER_BUILD_DIR:-$REPO/build/demo}
PYTHON=/usr/bin/python3 # Debian's python3, which has numpy and matplotlib
PACKAGES=(build-essential cmake pkg-config nanopb libnanopb-dev protobuf-compiler libsodium-dev
    python3-protobuf python3-numpy python3-matplotlib)

missing=()
if command -v dpkg-query >/dev/null 2>&1; then
    for p in "${PACKAGES[@]}"; do
        dpkg-query -W -f='${Status}' "$p" 2>/dev/null | grep -q '^install ok installed$' || missing+=("$p")
    done
fi
if ((${#missing[@]})); then
    echo "run_demo.sh: installing ${missing[*]}"
    SUDO=(); [[ $(id -u) == 0 ]] || SUDO=(sudo)
    "${SUDO[@]}" env DEBIAN_FRONTEND=noninteractive apt-get update -q
    "${SUDO[@]}" env DEBIAN_FRONTEND=noninteractive apt-get install -y -q "${missing[@]}"
fi

cmake -S "$REPO" -B "$BUILD_DIR" -DVEER_BUILD_TESTS=OFF -DCMAKE_BUILD_TYPE=Release >/dev/null
cmake --build "$BUILD_DIR" -j"$(nproc 2>/dev/null || echo 2)" --target demo veer_shared veer_python_proto >/dev/null
"$BUILD_DIR/examples/demo"

echo
SCENARIO=$REPO/examples/scenarios/kestrel_flats_lane4_demo.json
FIGURE=$BUILD_DIR/kestrel_flats_lane4_demo.png
export PYTHONPATH=$REPO/bindings/python${PYTHONPATH:+:$PYTHONPATH} VEER_LIBRARY=$BUILD_DIR/libveer.so MPLBACKEND=Agg
"$PYTHON" -m veer plan "$SCENARIO"
"$PYTHON" -m veer draw "$SCENARIO" -o "$FIGURE"
echo "figure: $FIGURE"
