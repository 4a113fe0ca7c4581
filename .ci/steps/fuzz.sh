#!/usr/bin/env bash
# Bounded fuzzing of every parser and loader of filter-core (the cargo-fuzz project in
# filter-core/fuzz, its own workspace). Each target runs for FUZZ_SECONDS (default 30) from its
# committed seeds; any crash (panic, failed invariant, debug assertion, timeout) fails the step
# and its input is printed so it can be added to tests/data/bad/fuzz/ as a regression test.
#
# The toolchain is stable: RUSTC_BOOTSTRAP=1 lets cargo-fuzz pass its -Z flags.
# `-s none`: no AddressSanitizer (safe Rust has no memory errors for it to find, and it halves
# the speed); `-a`: debug assertions on, so integer overflow panics as in a debug build.
set -euo pipefail
cd "$(dirname "$0")/../../filter-core/fuzz"

seconds="${FUZZ_SECONDS:-30}"
export RUSTC_BOOTSTRAP=1

if ! command -v cargo-fuzz >/dev/null 2>&1 && ! cargo fuzz --version >/dev/null 2>&1; then
  echo "installing cargo-fuzz"
  cargo install cargo-fuzz --locked --version 0.13.2
fi

# Longest input per target: values are short, files are a few kilobytes.
max_len() {
  case "$1" in
    units | cli_values) echo 256 ;;
    *) echo 16384 ;;
  esac
}

cargo fuzz build -s none -a
failed=()
summary=()
for t in $(cargo fuzz list); do
  mkdir -p "corpus/$t" "seeds/$t"
  log="$(mktemp)"
  started="$(mktemp)" # inputs written after this marker are this run's crashes
  echo "fuzzing $t for ${seconds} s"
  if cargo fuzz run -s none -a "$t" "corpus/$t" "seeds/$t" -- \
    -max_total_time="$seconds" -max_len="$(max_len "$t")" -timeout=20 -rss_limit_mb=2048 \
    -print_final_stats=1 >"$log" 2>&1; then
    runs="$(sed -n 's/^Done \([0-9]*\) runs.*/\1/p' "$log" | tail -1)"
    summary+=("$t: ${runs:-?} executions, no crash")
  else
    failed+=("$t")
    summary+=("$t: CRASH")
    grep -A4 'panicked at' "$log" | head -20 || true
    grep -E 'ERROR: libFuzzer|SUMMARY|Test unit written' "$log" || true
    for a in $(find "artifacts/$t" -type f -newer "$started" 2>/dev/null); do
      echo "--- crashing input $a (base64):"
      base64 -w 100 "$a" | head -200
    done
  fi
  rm -f "$log" "$started"
done

printf '%s\n' "${summary[@]}"
if [ ${#failed[@]} -gt 0 ]; then
  echo "fuzz targets crashed: ${failed[*]}"
  exit 1
fi
