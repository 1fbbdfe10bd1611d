"""Run a command and check its CPU time (user + system of the child), not its wall time, which depends on the
machine's load. Used by the end-to-end scripts.

usage: cpu_limit.py LIMIT_SECONDS LABEL STDOUT_FILE -- COMMAND [ARGS...]
Writes the command's standard output to STDOUT_FILE, prints "LABEL: exit RC, whole command X s of CPU" and exits 0
when the command exited 0 within the limit, 1 otherwise.
"""
import os
import subprocess
import sys


def main(argv):
    if len(argv) < 5 or argv[3] != "--":
        sys.exit(__doc__)
    limit, label, stdout_file, command = float(argv[0]), argv[1], argv[2], argv[4:]
    before = os.times()
    with open(stdout_file, "w") as fh:
        rc = subprocess.run(command, stdout=fh).returncode
    after = os.times()
    cpu = (after.children_user - before.children_user) + (after.children_system - before.children_system)
    print(f"{label}: exit {rc}, whole command {cpu:.2f} s of CPU (limit {limit:g} s)")
    return 0 if rc == 0 and cpu < limit else 1


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
