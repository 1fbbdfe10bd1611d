"""Shared by the tests of the compiled Python module (test_python_fit.py, test_python_sensitivity.py): the
arguments MODULE_DIR THERMORPH_EXE SOURCE_DIR, the module imported from MODULE_DIR, and check() / finish()."""
import sys
from pathlib import Path

module_dir, exe, src = sys.argv[1], sys.argv[2], Path(sys.argv[3])
sys.path.insert(0, module_dir)
import thermorph  # noqa: E402,F401

failures = []


def check(ok, what):
    print(("ok   " if ok else "FAIL ") + what)
    if not ok:
        failures.append(what)


def finish():
    print(f"{len(failures)} failure(s)")
    sys.exit(1 if failures else 0)
