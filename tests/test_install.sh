#!/usr/bin/env bash
# cmake --install into a temporary prefix, then build and run a tiny C++ consumer (tests/consumer/) with
# find_package(thermorph); check the man page and that the installed Python module imports.
# Arguments: BUILD_DIR SOURCE_DIR PYTHON
set -uo pipefail
build="$1"; src="$2"; python="${3:-/usr/bin/python3}"
work="$(mktemp -d)"; trap 'rm -rf "$work"' EXIT
fail() { echo "FAIL: $*"; exit 1; }
cmake --install "$build" --prefix "$work/prefix" > "$work/install.log" 2>&1 || { cat "$work/install.log"; fail "install"; }
[ -x "$work/prefix/bin/thermorph" ] || fail "no bin/thermorph"
[ -f "$work/prefix/include/thermorph/drivers/simulation.hpp" ] || fail "no headers"
man="$(find "$work/prefix" -name thermorph.1)"
[ -n "$man" ] && grep -q '^\.SH "THERMORPH run"' "$man" || fail "man page without the run subcommand"
cmake -S "$src/tests/consumer" -B "$work/consumer" -DCMAKE_PREFIX_PATH="$work/prefix" -DCMAKE_BUILD_TYPE=Release \
      > "$work/configure.log" 2>&1 || { cat "$work/configure.log"; fail "consumer configure"; }
cmake --build "$work/consumer" > "$work/build.log" 2>&1 || { cat "$work/build.log"; fail "consumer build"; }
"$work/consumer/consumer" || fail "consumer run"
module="$(find "$work/prefix" -name 'thermorph.cpython-*.so' | head -1)"
if [ -n "$module" ]; then
  PYTHONPATH="$(dirname "$module")" "$python" -c "import thermorph, thermorph_post; print('installed module', thermorph.__version__)" \
    || fail "installed Python module does not import"
fi
echo "install: all checks passed"
