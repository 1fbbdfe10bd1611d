#!/usr/bin/env python3
"""Writes cmake/thermorph.order: the `thermorph` executable's functions that runs execute, for the linker's symbol
ordering (lld --symbol-ordering-file, CMakeLists.txt). Not a test and not part of the build: run it again when the
code a run executes has changed much (a stale list costs resident pages, never correctness: the linker places the
listed functions first and everything else after, as before).

Why: the code pages a process touches are resident (peak RSS), and the kernel maps up to 64 KiB around each page
fault of a file-backed mapping (fault-around), so code spread over the whole executable makes most of it resident
(DEVELOPERS.md, "Memory at 10^5 nodes, twelfth round").

    /usr/bin/python3 tests/bench/symbol_order.py build/thermorph > cmake/thermorph.order

Functions executed (valgrind --tool=callgrind, mangled names) by: a `run` of the radial 10^4 case of peer_table.py
(first: the memory benchmark's case, so its code is one contiguous run), then `run` of the four examples with few
steps (limb cooling, quadruped, wading bird, large bill) and `check` of every example of cases/. Each function once,
in that order; within one command by name. (Sweeps and the other commands run the same model code; their own
functions come after, unlisted, in the linker's order.)
"""
import re
import subprocess
import sys
import tempfile
from pathlib import Path

HERE = Path(__file__).resolve().parent
ROOT = HERE.parent.parent
sys.path.insert(0, str(HERE))
from peer_table import radial_case  # noqa: E402


def executed(exe, args, cwd):
    """Mangled names of the functions of `exe` that `exe args` executes."""
    out = Path(cwd) / "callgrind.out"
    subprocess.run(["valgrind", "--tool=callgrind", "--demangle=no", f"--callgrind-out-file={out}", exe, *args],
                   cwd=cwd, check=True, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    objects, functions, names, current = {}, {}, set(), None
    exe_path = str(Path(exe).resolve())
    for line in out.read_text(errors="replace").splitlines():
        m = re.match(r"^(c?ob|c?fn)=\((\d+)\)(?: (.*))?$", line)
        if not m:
            continue
        kind, key, name = m.groups()
        table = objects if kind.endswith("ob") else functions
        if name:
            table[key] = name
        if kind == "ob":
            current = objects[key]
        elif kind == "fn" and current == exe_path:
            names.add(re.sub(r"'\d+$", "", functions[key]))
    out.unlink()
    return sorted(n for n in names if not n.startswith("0x") and n != "(below main)")


def main():
    if len(sys.argv) != 2:
        sys.exit("usage: symbol_order.py EXE > cmake/thermorph.order")
    exe = str(Path(sys.argv[1]).resolve())
    order, seen = [], set()
    with tempfile.TemporaryDirectory() as work:
        radial = Path(work) / "radial_9998.toml"
        radial.write_text(radial_case(9998))
        commands = [["run", str(radial), "-o", "r.h5", "-q"]]
        # The four examples whose runs take few steps (callgrind is ~50 times slower than a run), then `check` of
        # every example (the loader and the model build of the others).
        for name in ("limb_cooling", "quadruped", "wading_bird", "large_bill"):
            commands.append(["run", str(ROOT / "cases" / f"{name}.toml"), "-o", f"{name}.h5", "-q"])
        for case in sorted((ROOT / "cases").glob("*.toml")):
            commands.append(["check", str(case)])
        for args in commands:
            for name in executed(exe, args, work):
                if name not in seen:
                    seen.add(name)
                    order.append(name)
            print(f"{args[0]} {Path(args[1]).name}: {len(order)} functions", file=sys.stderr)
    print("\n".join(order))


if __name__ == "__main__":
    main()
