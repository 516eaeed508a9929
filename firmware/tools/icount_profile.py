#!/usr/bin/env python3
"""Instruction profile of a firmware image run in QEMU (development aid).

Runs the image with QEMU's translation and execution logs
(`-d in_asm,exec,nochain`), counts how often every instruction executed, and
attributes the counts to functions through the image's debug information
(inlined frames included, with llvm-symbolizer): exclusive counts per
innermost function and source line, inclusive counts per function.

    python3 firmware/tools/icount_profile.py ELF [--machine microbit] [--top 40]

Keep the run short (a few million instructions): the execution log has one
line per translated block executed. Build the cost programs for profiling
with their short variant, e.g. `CHAIN_COST_PROFILE=1 cargo build --release
--bin chain_cost`.
"""

import argparse
import bisect
import collections
import os
import re
import subprocess
import sys
import tempfile


def run_qemu(elf, machine, log):
    cmd = [
        "qemu-system-arm", "-machine", machine, "-nographic",
        "-semihosting-config", "enable=on,target=native",
        "-d", "in_asm,exec,nochain", "-D", log, "-kernel", elf,
    ]
    subprocess.run(cmd, check=False, timeout=3600, stdout=sys.stderr)


def symbolize(elf, addrs):
    """Inline chains (innermost first) of (function, file:line) per address."""
    inp = "".join("0x%x\n" % a for a in addrs)
    out = subprocess.run(
        ["llvm-symbolizer", "--obj=" + elf, "--inlining", "--demangle", "--functions=linkage"],
        input=inp, capture_output=True, text=True, check=True,
    ).stdout
    chains = []
    for block in out.strip("\n").split("\n\n"):
        lines = block.split("\n")
        frames = []
        for i in range(0, len(lines) - 1, 2):
            func = re.sub(r"::h[0-9a-f]{16}$", "", lines[i])
            for a, b in (("$LT$", "<"), ("$GT$", ">"), ("$u20$", " "), ("$C$", ","),
                         ("$u7b$", "{"), ("$u7d$", "}"), ("$RF$", "&"), ("..", "::")):
                func = func.replace(a, b)
            func = re.sub(r"^_<", "<", func)
            func = re.sub(r" \(\.llvm\.\d+\)", "", func)
            loc = lines[i + 1]
            loc = re.sub(r"^.*?/(core/src|firmware/src|library)/", r"\1/", loc)
            loc = re.sub(r":\d+$", "", loc)
            frames.append((func, loc))
        chains.append(frames)
    return chains


def functions(elf):
    """Sorted (start, end) of the image's functions (symbol table)."""
    out = subprocess.run(["llvm-nm", "--print-size", "--numeric-sort", elf],
                         capture_output=True, text=True, check=True).stdout
    ranges = []
    for line in out.splitlines():
        parts = line.split()
        if len(parts) >= 4 and parts[2] in "tTwW":
            start = int(parts[0], 16) & ~1
            ranges.append((start, start + int(parts[1], 16)))
    return ranges


def parse(log, ranges):
    """Replays the execution log with a shadow call stack.

    Returns a Counter of (call sites, instruction address) → executions, the
    call sites being the addresses of the `bl`/`blx` instructions on the
    stack, outermost first.
    """
    tb_counts = collections.Counter()
    starts = [a for a, _ in ranges]

    def func_of(addr):
        i = bisect.bisect_right(starts, addr) - 1
        return i if i >= 0 and addr < ranges[i][1] else -1

    pending = None  # a bl/blx just taken: (site, return address)
    tbs = {}  # pc → [(addr, size, mnemonic)]
    trace = re.compile(r"^Trace \d+: 0x[0-9a-f]+ \[[0-9a-f]+/([0-9a-f]+)/")
    insn = re.compile(r"^0x([0-9a-f]+):\s+((?:[0-9a-f]{4} ?)+)\s+(\S+)")
    stack = []  # [(call site, return address)]
    current = None
    with open(log, errors="replace") as f:
        for line in f:
            m = trace.match(line)
            if m:
                current = None
                pc = int(m.group(1), 16)
                if pending is not None:
                    # A `bl` inside one function is a far branch (Thumb-1
                    # `b` reaches only ±2 KiB), not a call.
                    if func_of(pending[0]) != func_of(pc) or func_of(pc) < 0:
                        stack.append(pending)
                        if len(stack) > 64:
                            del stack[0]
                    pending = None
                for depth in range(len(stack) - 1, max(-1, len(stack) - 9), -1):
                    if stack[depth][1] == pc:
                        del stack[depth:]
                        break
                body = tbs.get(pc)
                if not body:
                    continue
                tb_counts[(tuple(site for site, _ in stack), pc)] += 1
                a, size, mn = body[-1]
                if mn in ("bl", "blx"):
                    pending = (a, a + size)
                continue
            if line.startswith("IN:"):
                current = []
                continue
            if current is not None:
                m = insn.match(line)
                if m:
                    a = int(m.group(1), 16)
                    if not current:
                        tbs[a] = current
                    size = len(m.group(2).replace(" ", "")) // 2
                    current.append((a, size, m.group(3)))
                elif not line.strip():
                    current = None
    counts = collections.Counter()
    for (sites, pc), n in tb_counts.items():
        for a, _, _ in tbs.get(pc, []):
            counts[(sites, a)] += n
    return counts


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("elf")
    ap.add_argument("--machine", default="microbit")
    ap.add_argument("--top", type=int, default=40)
    ap.add_argument("--tree-min", type=float, default=0.3,
                    help="smallest share (%%) shown in the call tree")
    ap.add_argument("--root", default="", help="show the tree below this function only")
    ap.add_argument("--log", help="reuse an existing QEMU log")
    args = ap.parse_args()
    log = args.log
    if not log:
        log = os.path.join(tempfile.mkdtemp(), "qemu.log")
        run_qemu(args.elf, args.machine, log)
        print("log: %s" % log, file=sys.stderr)
    counts = parse(log, functions(args.elf))
    addrs = sorted({a for (sites, a) in counts} | {s for (sites, _) in counts for s in sites})
    chains = dict(zip(addrs, symbolize(args.elf, addrs)))
    total = sum(counts.values())
    excl = collections.Counter()
    lines = collections.Counter()
    incl = collections.Counter()
    tree = collections.Counter()
    for (sites, a), n in counts.items():
        path = []
        for s in sites:
            path.extend(f for f, _ in reversed(chains.get(s) or [("?", "?")]))
        inner = chains.get(a) or [("?", "?")]
        path.extend(f for f, _ in reversed(inner))
        # Collapse direct recursion and repeated inline names.
        dedup = []
        for f in path:
            if not dedup or dedup[-1] != f:
                dedup.append(f)
        if args.root:
            if args.root not in dedup:
                continue
            dedup = dedup[dedup.index(args.root):]
        excl[inner[0][0]] += n
        lines[inner[0][1]] += n
        for f in set(dedup):
            incl[f] += n
        for i in range(1, len(dedup) + 1):
            tree[tuple(dedup[:i])] += n
    print("total instructions executed: %d" % total)
    base = total
    if args.root:
        base = incl[args.root] or 1
        print("below %s: %d" % (args.root, base))
    print("\n== call tree (inclusive, inlined functions as frames)")
    children = collections.defaultdict(list)
    for k, n in tree.items():
        children[k[:-1]].append((n, k))

    def show(prefix, depth):
        for n, k in sorted(children.get(prefix, []), reverse=True):
            if 100.0 * n / base < args.tree_min:
                continue
            print("%12d %5.1f%%  %s%s" % (n, 100.0 * n / base, "  " * depth, k[-1][:120]))
            show(k, depth + 1)
    show((), 0)
    for title, c in (("inclusive per function", incl),
                     ("exclusive (innermost function)", excl),
                     ("exclusive by source line", lines)):
        print("\n== %s" % title)
        for k, n in c.most_common(args.top):
            print("%12d %5.1f%%  %s" % (n, 100.0 * n / base, k[:150]))


if __name__ == "__main__":
    main()
