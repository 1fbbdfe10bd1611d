#!/usr/bin/env bash
# Every Catch2 test case must run under ctest: catch_discover_tests (Catch2 2.13, CatchAddTests.cmake) reads the
# names as a CMake list, so a name with ';' splits into entries whose filters match nothing, and Catch2 exits 0 when
# no test case matches (tests/CMakeLists.txt). Argument: the Catch2 test executable.
set -uo pipefail
names="$("$1" --list-test-names-only)"  # Catch2 2 exits with the number of names listed
[ "$(printf '%s\n' "$names" | grep -c .)" -gt 100 ] || { echo "FAIL: too few test cases listed"; exit 1; }
bad="$(printf '%s\n' "$names" | grep ';')"
if [ -n "$bad" ]; then
  echo "FAIL: test case names with ';' (ctest would not run them; write ' - ' or ','):"
  printf '%s\n' "$bad"
  exit 1
fi
echo "catch_test_names: $(printf '%s\n' "$names" | grep -c .) names, none with ';'"
