#!/usr/bin/env bash
# The C ABI tests (bindings/c): builds libgenloom_c, writes the expected bytes with the Rust API,
# compiles the C test program with the system cc and runs it plainly, under valgrind, and built
# with AddressSanitizer; then builds and runs the C example (statically and dynamically linked)
# and checks its PNG files. Run from anywhere: `bash scripts/test-c.sh`. Exits non-zero on any
# failure; the last line is "c-tests: N passed, M failed".
set -euo pipefail
cd "$(dirname "$0")/.."

CC=${CC:-cc}
CFLAGS=(-std=c99 -D_POSIX_C_SOURCE=200809L -Wall -Wextra -Werror -pedantic -g -Ibindings/c/include)
# tract's assembly kernels carry no GNU-stack note; say explicitly that the stack is not executable.
LIBS=(-lm -lpthread -ldl -Wl,-z,noexecstack)

passed=0
failed=0
failures=()
stage() {
  local name=$1
  shift
  printf '\n-- %s\n' "$name"
  if "$@"; then
    passed=$((passed + 1))
  else
    failed=$((failed + 1))
    failures+=("$name")
    printf 'FAILED: %s\n' "$name"
  fi
}
summary() {
  echo
  if ((failed > 0)); then printf 'failed stages: %s\n' "${failures[*]}"; fi
  echo "c-tests: $passed passed, $failed failed"
}

work=$(mktemp -d)
trap 'rm -rf "$work"' EXIT

# The whole workspace with every target, as `cargo test --workspace --all-targets` builds it: the
# same feature unification, so after that command this build is already fresh (building only
# genloom-c would resolve other features and rebuild tract, about 8 minutes here).
echo "-- build libgenloom_c and the expected-bytes writer (dev profile, whole workspace)"
if ! cargo build --workspace --all-targets; then
  failed=1
  failures=("build")
  summary
  exit 1
fi
target=$(cargo metadata --format-version 1 --no-deps | sed -n 's/.*"target_directory":"\([^"]*\)".*/\1/p')
lib="$target/debug"
root=$(pwd)
models=models-demo

if ! command -v valgrind >/dev/null 2>&1 && command -v apt-get >/dev/null 2>&1 && [ "$(id -u)" = 0 ]; then
  echo "-- installing valgrind"
  (apt-get install -y -qq valgrind >/dev/null 2>&1 || { apt-get update -qq && apt-get install -y -qq valgrind; }) >/dev/null
fi

write_expected() { "$lib/examples/c-test-expected" "$work/expected" "$models"; }
header_compiles() {
  printf '#include "genloom.h"\nint main(void) { return GENLOOM_STATUS_OK; }\n' >"$work/h.c"
  "$CC" "${CFLAGS[@]}" -fsyntax-only "$work/h.c" || return 1
  if command -v c++ >/dev/null 2>&1; then
    c++ -std=c++11 -Wall -Wextra -Werror -pedantic -Ibindings/c/include -fsyntax-only -x c++ "$work/h.c"
  fi
}
build_test() {
  "$CC" "${CFLAGS[@]}" bindings/c/tests/c/test_genloom.c "$lib/libgenloom_c.a" "${LIBS[@]}" -o "$work/test_genloom"
}
run_test() { "$work/test_genloom" "$work/expected" "$models"; }
run_valgrind() {
  command -v valgrind >/dev/null 2>&1 || { echo "valgrind is not installed"; return 1; }
  # Only definite and indirect leaks fail; tract and the Rust runtime keep some blocks reachable
  # until exit (thread-locals, lazily built tables), which is not a leak. --under-valgrind: see the C file.
  valgrind --error-exitcode=1 --leak-check=full --errors-for-leak-kinds=definite,indirect \
    --show-leak-kinds=definite,indirect "$work/test_genloom" "$work/expected" "$models" --under-valgrind \
    2>"$work/valgrind.log"
  local rc=$?
  grep -E 'ERROR SUMMARY|definitely lost|indirectly lost|possibly lost|still reachable' "$work/valgrind.log" | sed 's/^==[0-9]*== */  valgrind: /'
  if ((rc != 0)); then tail -n 60 "$work/valgrind.log"; fi
  return $rc
}
run_asan() {
  "$CC" "${CFLAGS[@]}" -fsanitize=address -fno-omit-frame-pointer bindings/c/tests/c/test_genloom.c \
    "$lib/libgenloom_c.a" "${LIBS[@]}" -o "$work/test_genloom_asan" || return 1
  ASAN_OPTIONS=detect_leaks=1:halt_on_error=1 "$work/test_genloom_asan" "$work/expected" "$models"
}
same_tiles() {
  local dir=$1 i f
  for i in $(seq -w 0 15); do
    f="tile-$i.png"
    cmp -s "$dir/$f" "$work/expected/$f" || { echo "$dir/$f differs from the Rust API's PNG"; return 1; }
  done
  echo "  16 tiles equal the Rust API's PNG files"
}
example_static() {
  # The command documented in bindings/c/README.md (with the target directory and output path).
  "$CC" bindings/c/examples/tiles.c -Ibindings/c/include "$lib/libgenloom_c.a" "${LIBS[@]}" -o "$work/tiles" || return 1
  mkdir -p "$work/static" && (cd "$work/static" && "$work/tiles" "$root/$models/tiles.onnx") || return 1
  same_tiles "$work/static"
}
example_dynamic() {
  "$CC" bindings/c/examples/tiles.c -Ibindings/c/include -L"$lib" -lgenloom_c -o "$work/tiles-dyn" || return 1
  mkdir -p "$work/dynamic" && (cd "$work/dynamic" && LD_LIBRARY_PATH="$lib" "$work/tiles-dyn" "$root/$models/tiles.onnx") || return 1
  same_tiles "$work/dynamic"
}

stage "write the expected bytes with the Rust API" write_expected
stage "the header compiles as C99 and C++11" header_compiles
stage "compile the C test program" build_test
stage "run the C test program" run_test
stage "run it under valgrind (leaks and memory errors)" run_valgrind
stage "run it built with AddressSanitizer" run_asan
stage "the tiles example, statically linked" example_static
stage "the tiles example, dynamically linked" example_dynamic

summary
((failed == 0))
