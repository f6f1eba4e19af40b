#!/usr/bin/env python3
"""Where the per-sample instructions go: a source-level profile of a QEMU run.

Usage: profile.py ELF LOG CALLS

LOG is QEMU's `-d in_asm,exec,nochain` output (a FIFO, read as it is
written). Every executed translation block is charged to its first
instruction's address, times the block's length; instructions inside
library routines (soft float, libm, memcpy) are charged to the call site,
so on a Cortex-M0 a soft-float addition shows up where the `+` is written.
Addresses are resolved with `arm-none-eabi-addr2line -i`, inlining
included. CALLS is what each function's count is divided by: the number of
times the measured functions ran.
"""
import bisect
import collections
import re
import subprocess
import sys

LIBRARY = re.compile(
    r"compiler_builtins|__aeabi|libm::|__clz|__ctz|__udiv|__div|__mul|memcpy|memset|memmove"
)
TRACE = re.compile(r"^Trace \d+: \S+ \[[0-9a-f]+/([0-9a-f]+)/")


def symbols(elf):
    out = []
    nm = subprocess.run(
        ["arm-none-eabi-nm", "-S", "--defined-only", "-C", elf],
        capture_output=True, text=True, check=True,
    ).stdout
    for line in nm.splitlines():
        p = line.split(None, 3)
        if len(p) == 4 and p[2] in "tTwW":
            out.append((int(p[0], 16) & ~1, int(p[1], 16), p[3]))
    out.sort()
    return out


def main():
    elf, log, calls = sys.argv[1], sys.argv[2], float(sys.argv[3])
    syms = symbols(elf)
    starts = [s[0] for s in syms]

    def library(pc):
        i = bisect.bisect_right(starts, pc) - 1
        if i >= 0 and pc < syms[i][0] + syms[i][1] and LIBRARY.search(syms[i][2]):
            return syms[i][2]
        return ""

    block_len, is_lib = {}, {}
    own = collections.Counter()  # pc -> instructions
    lib = collections.Counter()  # (call site, routine) -> instructions
    site, block = 0, None
    with open(log, errors="replace") as f:
        for line in f:
            if line.startswith("Trace"):
                m = TRACE.match(line)
                if not m:
                    continue
                pc = int(m.group(1), 16)
                n = block_len.get(pc)
                if n is None:
                    continue
                name = is_lib.get(pc)
                if name is None:
                    name = is_lib[pc] = library(pc)
                if name:
                    lib[(site, name)] += n
                else:
                    site = pc
                    own[pc] += n
            elif line.startswith("IN:"):
                block = []
            elif block is not None and line.startswith("0x"):
                block.append(int(line.split(":")[0], 16))
            elif block is not None and not line.strip():
                if block:
                    block_len[block[0]] = len(block)
                block = None

    pcs = sorted(set(own) | {s for s, _ in lib})
    chains, cur = {}, None
    a2l = subprocess.run(
        ["arm-none-eabi-addr2line", "-e", elf, "-i", "-f", "-C", "-a"] + [hex(p) for p in pcs],
        capture_output=True, text=True, check=True,
    ).stdout
    for line in a2l.splitlines():
        if line.startswith("0x"):
            cur = chains[int(line, 16)] = []
        elif cur is not None:
            cur.append(line)

    def frames(pc):
        c = chains.get(pc, [])
        return [
            (c[k].split("::")[-1], c[k + 1].rsplit("/", 1)[-1].split(" ")[0])
            for k in range(0, len(c) - 1, 2)
        ]

    by_function = collections.Counter()
    by_line = collections.defaultdict(collections.Counter)
    for counter, routine in ((own, None), (lib, True)):
        for key, n in counter.items():
            pc, name = (key, None) if routine is None else key
            fr = frames(pc)
            if not fr:
                continue
            outer = fr[-1][0]
            by_function[outer] += n
            where = f"{fr[0][0]} {fr[0][1]}"
            if name:
                where += f"  [{name.split('::')[-1]}]"
            by_line[outer][where] += n

    print(f"instructions per call ({calls:.0f} calls), by outermost function:")
    for fn, n in by_function.most_common(30):
        print(f"{n / calls:10.1f}  {fn}")
    for fn in ("push", "update", "slide"):
        if fn in by_line:
            print(f"\n{fn}: where its {by_function[fn] / calls:.0f} instructions go (innermost source line)")
            for where, n in by_line[fn].most_common(40):
                print(f"{n / calls:10.1f}  {where}")


if __name__ == "__main__":
    main()
