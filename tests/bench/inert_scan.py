#!/usr/bin/env python3
"""Scan cases for keys that change nothing bit for bit but are accepted without a warning (issue 11 class:
"a default or a key that silently does nothing").

For each case and each line of it that gives one number as `key = value` (a whole line, outside arrays and
inline tables), the case is run with that number set to 0 and scaled by 1.5 (0: set to 0.5), and every temperature and heat-flow dataset of the results (`body/`, `segments/`) is compared bit for bit with the
unchanged case's. A variant equal to the base whose key the base run did not warn of ("FILE:LINE:COLUMN: ... has no
effect") is printed as a finding; a key that warns but whose variant moves the results is printed as a false warning.
(A finding can be a key whose two values happen to give the same run, e.g. a clamp not reached: read it.)
`label` and `span` of [[events]] (figures only) are left alone. Variants the loader refuses (a required key, a value out of range) are counted and skipped.

Not a ctest: a case of a few seconds gives about 100 runs. Usage (from the repository):
  nice /usr/bin/python3 tests/bench/inert_scan.py --exe build/thermorph [--set KEY=VALUE ...] CASE.toml ...
`--set run.grid_tolerance=0.2` shortens the runs (a coarser automatic grid; findings are then checked at the case's
own settings before they are reported). Exit code 1 when there is a finding.
"""
import argparse
import os
import re
import shutil
import subprocess
import sys
import tempfile

import h5py
import numpy as np

KEY_LINE = re.compile(r'^(\s*)([A-Za-z0-9_\-]+)(\s*=\s*)(.+?)\s*(#.*)?$')
NUMBER = re.compile(r'(?<![A-Za-z0-9_.])([-+]?\d+(?:\.\d*)?(?:[eE][-+]?\d+)?)')


def results(path):
    """Every numeric dataset under body/ and segments/, by name."""
    out = {}
    with h5py.File(path, "r") as f:
        def visit(name, obj):
            if isinstance(obj, h5py.Dataset) and obj.dtype.kind in "fiu" and name.split("/")[0] in ("body", "segments"):
                out[name] = obj[()]
        f.visititems(visit)
    return out


def same(a, b):
    return a.keys() == b.keys() and all(a[k].shape == b[k].shape and np.array_equal(a[k].view(np.uint8) if a[k].dtype.kind == "f" else a[k],
                                                                                       b[k].view(np.uint8) if b[k].dtype.kind == "f" else b[k])
                                         for k in a)


def run(exe, text, name, folder, sets):
    """(results or None when refused, stderr)."""
    case = os.path.join(folder, name)
    with open(case, "w") as f:
        f.write(text)
    out = os.path.join(folder, "out.h5")
    if os.path.exists(out):
        os.remove(out)
    cmd = [exe, "run", case, "-q", "-o", out]
    for s in sets:
        cmd += ["--set", s]
    p = subprocess.run(cmd, capture_output=True, text=True, cwd=folder)
    if p.returncode != 0:
        return None, p.stderr
    return results(out), p.stderr


def warned_lines(stderr, name):
    """Lines of the case named by "NAME:LINE:COLUMN: ... has no effect" warnings."""
    return {int(m.group(1)) for m in re.finditer(re.escape(name) + r":(\d+):\d+: [^\n]*has no effect", stderr)}


def variants(lines):
    """(line number, description, new text) per variant: each number of a `key = value` line set to 0 (when it is
    not 0) and scaled by 1.5 (0 becomes 0.5). Removing a line is no test: the default often equals the value."""
    in_array = 0
    for i, line in enumerate(lines):
        stripped = line.strip()
        if in_array:
            in_array += line.count("[") - line.count("]")
            continue
        m = KEY_LINE.match(line)
        if not m or stripped.startswith("#") or stripped.startswith("["):
            continue
        value = m.group(4)
        if value.count("[") > value.count("]"):  # a multi-line array: left alone
            in_array = value.count("[") - value.count("]")
            continue
        if value.startswith("{") or value.startswith("[") or m.group(2) in ("title", "name", "parent", "base", "label", "span"):
            continue
        n = NUMBER.search(value)
        if not n:
            continue
        x = float(n.group(1))
        for what, y in (("set to 0", 0.0), ("scaled by 1.5", 1.5 * x if x != 0.0 else 0.5)):
            if y == x:
                continue
            text = value[:n.start(1)] + repr(y) + value[n.end(1):]
            if re.fullmatch(r"[-+]?\d+", n.group(1)) and y == int(y):
                text = value[:n.start(1)] + str(int(y)) + value[n.end(1):]
            yield i, what, lines[:i] + [m.group(1) + m.group(2) + m.group(3) + text + "\n"] + lines[i + 1:]


def scan(exe, path, sets, verify_sets):
    folder = tempfile.mkdtemp(prefix="inert_scan_")
    try:
        return scan_in(exe, path, sets, verify_sets, folder)
    finally:
        shutil.rmtree(folder, ignore_errors=True)


def scan_in(exe, path, sets, verify_sets, folder):
    name = os.path.basename(path)
    with open(path) as f:
        lines = f.readlines()
    # Other files the case names (weather, tissues) are read relative to the case: link the case's folder's files.
    for entry in os.listdir(os.path.dirname(os.path.abspath(path))):
        src = os.path.join(os.path.dirname(os.path.abspath(path)), entry)
        if os.path.isfile(src) and not entry.endswith(".toml"):
            os.symlink(src, os.path.join(folder, entry))
    base, err = run(exe, "".join(lines), name, folder, sets)
    if base is None:
        print(f"{path}: the case itself fails: {err.strip()[:300]}")
        return 0
    warned = warned_lines(err, name)
    findings = refused = tried = 0
    for i, what, text in variants(lines):
        tried += 1
        r, e = run(exe, "".join(text), name, folder, sets)
        if r is None:
            refused += 1
            continue
        equal = same(base, r)
        if equal and (i + 1) not in warned:
            if verify_sets != sets:  # check at the case's own settings
                b0, _ = run(exe, "".join(lines), name, folder, verify_sets)
                r0, _ = run(exe, "".join(text), name, folder, verify_sets)
                if b0 is None or r0 is None or not same(b0, r0):
                    continue
            findings += 1
            print(f"FINDING {path}:{i + 1}: {lines[i].strip()!r} {what}: results bit for bit equal, no warning")
        elif not equal and (i + 1) in warned:
            findings += 1
            print(f"FALSE WARNING {path}:{i + 1}: {lines[i].strip()!r} {what}: results move, but the case warns")
    print(f"{path}: {tried} variants, {refused} refused by the loader, {findings} findings")
    return findings


def main():
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--exe", default="build/thermorph")
    ap.add_argument("--set", action="append", default=[], help="override for every run (e.g. a coarser grid)")
    ap.add_argument("cases", nargs="+")
    a = ap.parse_args()
    exe = os.path.abspath(a.exe)
    total = sum(scan(exe, c, a.set, []) for c in a.cases)
    sys.exit(1 if total else 0)


if __name__ == "__main__":
    main()
