"""Cart-side code and static RAM: links bench/cart_min.c (the player with its
receiver and plan decoder) against libveer.a with --gc-sections and sums, from
the GNU ld map, the input sections that made it into the program, by the
archive member they came from.

  /usr/bin/python3 bench/size.py BUILD_DIR [CC [OPT]]

A library configured with -DVEER_TERSE_DIAG=ON (diagnostics without their
message text) is named so in the heading and its summary keys end in _terse.

Code is .text* and .rodata* (what goes to flash), static RAM .data* and
.bss*. libc and libm are linked dynamically here and not counted (the
link's HMAC-SHA-256 is veer's own, counted with it). The library must be built
with -ffunction-sections -fdata-sections (bench/run.sh does) so that unused
functions drop out.
"""

import collections
import os
import re
import subprocess
import sys

HERE = os.path.dirname(os.path.abspath(__file__))
REPO = os.path.dirname(HERE)

LINE = re.compile(r"^\s*(\S+)?\s+0x([0-9a-f]+)\s+0x([0-9a-f]+)\s+(\S+)$")


def kind(section):
    for prefix, k in ((".text", "code"), (".rodata", "code"), (".data.rel.ro", "code"), (".data", "ram"),
                      (".bss", "ram"), (".tbss", "ram"), (".tdata", "ram"), ("COMMON", "ram")):
        if section.startswith(prefix):
            return k
    return None


def origin(path):
    m = re.search(r"([^/]+\.a)\(([^)]+)\)$", path)
    if m:
        return m.group(1), m.group(2)
    return os.path.basename(path), os.path.basename(path)


def link(build, cc, opt, out):
    mapfile = out + ".map"
    cmd = [cc, "-std=c11", opt, "-ffunction-sections", "-fdata-sections", "-I", os.path.join(REPO, "include"),
           os.path.join(HERE, "cart_min.c"), os.path.join(build, "libveer.a"), "-Wl,--gc-sections",
           "-Wl,-Map=" + mapfile, "-lm", "-o", out]
    subprocess.run(cmd, check=True)
    return mapfile


def parse(mapfile):
    sizes = collections.defaultdict(lambda: collections.Counter())
    section = None
    in_map = False
    with open(mapfile) as f:
        for raw in f:
            line = raw.rstrip("\n")
            if line.startswith("Linker script and memory map"):
                in_map = True
                continue
            if not in_map:
                continue
            if re.match(r"^ \S+$", line):  # a long section name on a line of its own
                section = line.strip()
                continue
            m = LINE.match(line)
            if not m or not line.startswith(" "):
                continue
            name = m.group(1) or section
            section = None
            if not name or not name.startswith((".", "COMMON")):
                continue
            k = kind(name)
            size = int(m.group(3), 16)
            if k is None or size == 0:
                continue
            archive, member = origin(m.group(4))
            sizes[(archive, member)][k] += size
    return sizes


def main():
    build = sys.argv[1]
    cc = sys.argv[2] if len(sys.argv) > 2 else "cc"
    opt = sys.argv[3] if len(sys.argv) > 3 else "-O2"
    out = os.path.join(build, "cart_min")
    sizes = parse(link(build, cc, opt, out))
    veer = {k: v for k, v in sizes.items() if k[0] == "libveer.a"}

    def group(member):
        if member.startswith("pb_"):
            return "nanopb runtime"
        if ".pb.c" in member:
            return "generated messages (nanopb)"
        return "veer"

    terse = False
    cache = os.path.join(build, "CMakeCache.txt")
    if os.path.exists(cache):
        with open(cache) as f:
            terse = any(line.strip() == "VEER_TERSE_DIAG:BOOL=ON" for line in f)
    print("### Cart-side code and static RAM (bench/cart_min.c linked with --gc-sections; %s, library and "
          "program at %s%s)\n" % (cc, opt, "; library with VEER_TERSE_DIAG: messages are the status text" if terse
                                   else ""))
    print("| object | code (text + rodata) B | static RAM (data + bss) B |\n|---|---|---|")
    tot = collections.Counter()
    for (a, mbr), c in sorted(veer.items(), key=lambda kv: -kv[1]["code"]):
        print("| %s | %d | %d |" % (mbr.replace(".c.o", ".c"), c["code"], c["ram"]))
        tot.update(c)
    by = collections.defaultdict(collections.Counter)
    for (a, mbr), c in veer.items():
        by[group(mbr)].update(c)
    print("| **veer + nanopb, total** | **%d (%.1f KiB)** | **%d (%.1f KiB)** |" % (
        tot["code"], tot["code"] / 1024, tot["ram"], tot["ram"] / 1024))
    print()
    for g in ("veer", "nanopb runtime", "generated messages (nanopb)"):
        print("- %s: %d B code, %d B static RAM" % (g, by[g]["code"], by[g]["ram"]))
    tag = ("" if opt == "-O2" else "_" + opt.lstrip("-")) + ("_terse" if terse else "")
    print("\nsummary code_bytes%s %d ram_bytes%s %d" % (tag, tot["code"], tag, tot["ram"]))


if __name__ == "__main__":
    main()
