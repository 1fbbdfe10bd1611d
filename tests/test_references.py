#!/usr/bin/env python3
"""Every published source the code, tests and docs cite by author and year has an entry in docs/references.md.

A citation is a capitalised surname, optionally "& Surname" or "et al.", followed by a year 1800-2025 (bare or in
parentheses), e.g. "Incropera et al. 2007", "Bates & Watts (1981)". Dates of our own measurements (2026 and later)
are not citations. The check: the first surname appears in docs/references.md. Common practice, no source.
"""
import re
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
CITE = re.compile(r"\b([A-Z][a-z]+(?:[ -][A-Z][a-z]+)?)(?: (?:&|and) [A-Z][a-z]+| et al\.)?,? \(?(1[89]\d\d|20[01]\d|202[0-5])[a-z]?\b(?!\.\d)")
SUFFIXES = {".cpp", ".hpp", ".py", ".md", ".sh", ".toml", ".cmake"}
SKIP = {"models/udunits", "build", ".git"}
# Capitalised words that precede a year without being an author (a sentence start, a month).
NOT_AUTHORS = {"In", "Since", "From", "Until", "Before", "After", "January", "February", "March", "April", "May",
               "June", "July", "August", "September", "October", "November", "December", "Table", "Figure"}


def sources():
    for path in ROOT.rglob("*"):
        rel = path.relative_to(ROOT).as_posix()
        if path.is_file() and path.suffix in SUFFIXES and not any(rel == s or rel.startswith(s + "/") for s in SKIP):
            if rel != "docs/references.md":
                yield rel, path


def main():
    refs = (ROOT / "docs/references.md").read_text(encoding="utf-8")
    missing = {}
    count = 0
    for rel, path in sources():
        for m in CITE.finditer(path.read_text(encoding="utf-8", errors="replace")):
            name = m.group(1).split()[-1] if m.group(1).split()[0] in NOT_AUTHORS else m.group(1).split()[0]
            if name in NOT_AUTHORS:
                continue
            count += 1
            if name not in refs:
                missing.setdefault(f"{name} {m.group(2)}", rel)
    for cite, where in sorted(missing.items()):
        print(f"not in docs/references.md: {cite} (cited in {where})")
    print(f"{count} citations checked, {len(missing)} missing")
    return 1 if missing else 0


if __name__ == "__main__":
    sys.exit(main())
