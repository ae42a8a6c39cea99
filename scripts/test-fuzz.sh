#!/usr/bin/env bash
# Fuzzes genloom for a bounded time: builds the cargo-fuzz targets in fuzz/ (installing
# cargo-fuzz when it is missing) and runs each target for FUZZ_SECONDS seconds (default 60) on a
# copy of its committed seed corpus in a temporary folder, so that a run never changes the
# repository. Prints each target's executions per second and total executions, and fails
# (exit 1) on any crash, timeout or out-of-memory; the last line is "fuzz: N passed, M failed".
#
# Run from anywhere: `bash scripts/test-fuzz.sh`. Needs a nightly toolchain (`rustup toolchain
# install nightly`). Settings, all optional:
#   FUZZ_SECONDS      seconds per target (default 60)
#   FUZZ_TARGETS      space-separated targets (default: all four)
#   FUZZ_BUILD_FLAGS  flags for `cargo fuzz build` and `run` (default: --debug-assertions, so
#                     that integer overflow and debug assertions in genloom are caught too)
#   FUZZ_KEEP=1       keep the temporary folder (corpus grown by the run, logs) even on success
# A failing target's input is saved in the temporary folder, whose path is printed; reproduce it
# with `cargo +nightly fuzz run TARGET FILE` from the repository root (see fuzz/README.md).
set -euo pipefail
cd "$(dirname "$0")/.."

seconds=${FUZZ_SECONDS:-60}
read -r -a targets <<<"${FUZZ_TARGETS:-model_bytes npy latent_params c_open_bytes}"
read -r -a build_flags <<<"${FUZZ_BUILD_FLAGS---debug-assertions}"
start=$(date +%s)

if ! cargo +nightly --version >/dev/null 2>&1; then
  echo "fuzz: the nightly toolchain is missing (rustup toolchain install nightly)" >&2
  echo "fuzz: 0 passed, ${#targets[@]} failed"
  exit 1
fi
if ! cargo fuzz --version >/dev/null 2>&1; then
  echo "-- installing cargo-fuzz"
  cargo install cargo-fuzz --locked
fi

echo "-- build the fuzz targets: cargo +nightly fuzz build ${build_flags[*]}"
if ! cargo +nightly fuzz build "${build_flags[@]}"; then
  echo "fuzz: the build failed"
  echo "fuzz: 0 passed, ${#targets[@]} failed"
  exit 1
fi
built=$(date +%s)
echo "-- built in $((built - start)) s"

work=$(mktemp -d)
passed=0
failed=0
failures=()
summary=()
for target in "${targets[@]}"; do
  echo
  echo "-- fuzz $target for ${seconds} s"
  corpus=$work/corpus/$target
  artifacts=$work/artifacts/$target
  mkdir -p "$corpus" "$artifacts"
  if [[ -d fuzz/corpus/$target ]]; then
    cp -R "fuzz/corpus/$target/." "$corpus/"
  fi
  log=$work/$target.log
  status=0
  cargo +nightly fuzz run "${build_flags[@]}" "$target" "$corpus" -- \
    -max_total_time="$seconds" -rss_limit_mb=2048 -timeout=10 -print_final_stats=1 \
    -artifact_prefix="$artifacts/" >"$log" 2>&1 || status=$?
  # The panic locations genloom caught (tract's internal errors), one line each.
  grep -E '^genloom-fuzz: ' "$log" | sort | uniq -c | sed 's/^/   /' | head -n 20 || true
  stat() { sed -n "s/^stat::$1: *//p" "$log" | tail -n 1; }
  runs=$(stat number_of_executed_units)
  rate=$(stat average_exec_per_sec)
  added=$(stat new_units_added)
  rss=$(stat peak_rss_mb)
  found=$(find "$artifacts" -type f | wc -l)
  line=$(printf '%-14s %10s execs  %7s exec/s  %5s new units  %5s MB peak RSS' \
    "$target" "${runs:-?}" "${rate:-?}" "${added:-?}" "${rss:-?}")
  if ((status == 0 && found == 0)); then
    passed=$((passed + 1))
    summary+=("ok     $line")
    echo "   $line"
  else
    failed=$((failed + 1))
    failures+=("$target")
    summary+=("FAILED $line")
    echo "FAILED: $target (exit $status, $found input(s) saved in $artifacts)"
    tail -n 60 "$log"
  fi
done
end=$(date +%s)

echo
echo "-- summary (build $((built - start)) s, fuzzing $((end - built)) s, total $((end - start)) s)"
printf '   %s\n' "${summary[@]}"
if ((failed > 0)) || [[ ${FUZZ_KEEP:-0} == 1 ]]; then
  echo "   logs, grown corpora and saved inputs kept in $work"
  if ((failed > 0)); then printf '   failed targets: %s\n' "${failures[*]}"; fi
else
  rm -rf "$work"
fi
echo "fuzz: $passed passed, $failed failed"
((failed == 0))
