#!/usr/bin/env python3
"""Docs and cautions: (1) the caution text of models/caution.hpp is what every computing subcommand prints on
stderr, what results and sweep files store, what report.py prints, what every postproc CAUTION constant holds, and
how every note in cases/ ends; (2) docs/regenerate.py detects a drifted number and accepts a current one.

    test_docs.py PYTHON THERMORPH
"""
import ast
import re
import subprocess
import sys
import tempfile
from pathlib import Path

import h5py

ROOT = Path(__file__).resolve().parent.parent
PYTHON = sys.argv[1] if len(sys.argv) > 1 else sys.executable
THERMORPH = str(Path(sys.argv[2]).resolve()) if len(sys.argv) > 2 else str(ROOT / "build" / "thermorph")
FAILURES = []


def check(ok, message):
    if not ok:
        FAILURES.append(message)
        print("FAIL:", message)


def cpp_caution():
    """The string literal(s) of `caution` in models/caution.hpp, concatenated as the compiler does."""
    text = (ROOT / "models" / "caution.hpp").read_text()
    body = text[text.index("caution ="):text.index("\";", text.index("caution =")) + 1]
    return "".join(ast.literal_eval(s) for s in re.findall(r'"(?:[^"\\]|\\.)*"', body))


def postproc_cautions():
    """Every module-level CAUTION = <string literal> in postproc/ (any file, any depth)."""
    found = {}
    for path in sorted((ROOT / "postproc").rglob("*.py")):
        for node in ast.parse(path.read_text()).body:
            if isinstance(node, ast.Assign) and any(getattr(t, "id", None) == "CAUTION" for t in node.targets):
                try:
                    found[str(path.relative_to(ROOT))] = ast.literal_eval(node.value)
                except ValueError:
                    pass  # imported or computed from another constant: checked where that one is defined
    return found


def main():
    caution = cpp_caution()
    check(caution.startswith("Model estimates for research only") and "animal-welfare" in caution, caution)
    with tempfile.TemporaryDirectory() as tmp:
        tmp = Path(tmp)
        case = ROOT / "cases" / "limb_cooling.toml"
        # Every computing subcommand prints the caution once on stderr.
        for sub, extra in (("run", ["-o", str(tmp / "r.h5"), "--set", "run.duration=5 min"]),
                           ("steady", ["-o", str(tmp / "s.h5")]), ("check", []),
                           ("sweep", ["--vary", "environment.temperature=5 degC,10 degC", "--set", "run.duration=5 min",
                                      "-o", str(tmp / "w.h5"), "-q"])):
            proc = subprocess.run([THERMORPH, sub, str(case)] + extra, capture_output=True, text=True, cwd=tmp)
            check(proc.returncode == 0, f"{sub}: exit {proc.returncode}: {proc.stderr}")
            check(proc.stderr.count(caution) == 1, f"{sub}: caution printed {proc.stderr.count(caution)} times on stderr")
            check(caution not in proc.stdout, f"{sub}: caution on stdout (it belongs on stderr)")
        proc = subprocess.run([THERMORPH, "--help"], capture_output=True, text=True)
        check(caution in proc.stdout, "--help lacks the caution")
        # Stored in result and sweep files.
        for name in ("r.h5", "s.h5", "w.h5"):
            with h5py.File(tmp / name, "r") as f:
                stored = f.attrs["caution"]
                stored = stored.decode() if isinstance(stored, bytes) else stored
                check(stored == caution, f"{name}: caution attribute {stored!r}")
        # report.py prints it.
        proc = subprocess.run([PYTHON, str(ROOT / "postproc" / "report.py"), str(tmp / "r.h5")], capture_output=True,
                              text=True)
        check(proc.returncode == 0, f"report.py exit {proc.returncode}: {proc.stderr}")
        check(caution in proc.stdout, "report.py output lacks the caution")
    # The postproc constants (report and figures) hold the same text.
    constants = postproc_cautions()
    check(len(constants) >= 1, "no CAUTION constant in postproc/")
    for path, text in constants.items():
        check(text == caution, f"{path}: CAUTION differs from models/caution.hpp: {text!r}")
    # Every note in cases/ ends with the caution.
    for note in sorted((ROOT / "cases").glob("*.md")):
        last = note.read_text().rstrip().splitlines()[-1]
        check(last == f"**Caution.** {caution}", f"{note.name} does not end with the caution")

    # regenerate.py: a drifted number fails, a current one passes, --write repairs it.
    with tempfile.TemporaryDirectory() as tmp:
        note = Path(tmp) / "note.md"
        run = "<!-- gen-run limb: steady cases/limb_cooling.toml -->\n"
        for stored, want in (("99.99", 1), ("{now}", 0)):
            text = run + f"Core <!-- gen:limb .3f r.core[-1] -->{stored}<!-- /gen --> degC.\n"
            if stored == "{now}":
                note.write_text(run + "Core <!-- gen:limb .3f r.core[-1] -->0<!-- /gen --> degC.\n")
                subprocess.run([PYTHON, str(ROOT / "docs" / "regenerate.py"), "--exe", THERMORPH, "--write",
                                str(note)], capture_output=True, text=True)
                text = note.read_text()
                check("99.99" not in text and "-->0<" not in text, f"--write did not regenerate: {text}")
            note.write_text(text)
            proc = subprocess.run([PYTHON, str(ROOT / "docs" / "regenerate.py"), "--exe", THERMORPH, str(note)],
                                  capture_output=True, text=True)
            check(proc.returncode == want, f"regenerate.py on {stored}: exit {proc.returncode}, want {want}: "
                  f"{proc.stdout}{proc.stderr}")
    print("test_docs: " + ("FAILED" if FAILURES else "all checks passed"))
    return 1 if FAILURES else 0


if __name__ == "__main__":
    sys.exit(main())
