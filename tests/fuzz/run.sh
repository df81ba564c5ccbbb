#!/usr/bin/env bash
# Runs every Linegate fuzz target for a bounded time and reports executions and crashes.
# Usage: tests/fuzz/run.sh [seconds-per-target, default 60] [target ...]
# Needs the nightly toolchain and cargo-fuzz (installed here if missing). Not part of `.ci/run`.
set -euo pipefail
here=$(cd "$(dirname "$0")" && pwd)
secs=${1:-60}
shift || true
targets=("$@")
[ ${#targets[@]} -gt 0 ] || targets=(blob_decode kernel bench_log channel_sheet hex_image model_file signal_log parquet_log field_inputs)
# cargo-fuzz needs nightly flags (-Z sanitizer); without a nightly toolchain the stable one
# is told to accept them (RUSTC_BOOTSTRAP=1), which works for these targets.
if rustup run nightly rustc --version >/dev/null 2>&1; then
  toolchain=(+nightly)
else
  toolchain=()
  export RUSTC_BOOTSTRAP=1
  echo "no nightly toolchain: fuzzing with the stable one under RUSTC_BOOTSTRAP=1"
fi
command -v cargo-fuzz >/dev/null || cargo install cargo-fuzz --locked
status=0
for t in "${targets[@]}"; do
  work=$(mktemp -d)
  cp "$here/corpus/$t"/* "$work"/
  log="$work/fuzz.log"
  if (cd "$here" && cargo "${toolchain[@]}" fuzz run --fuzz-dir "$here" "$t" "$work" -- \
        -max_total_time="$secs" -print_final_stats=1 -rss_limit_mb=4096 -max_len=65536) >"$log" 2>&1; then
    result=ok
  else
    result="CRASH (see $log and $here/artifacts/$t/)"
    status=1
  fi
  execs=$(grep -o 'stat::number_of_executed_units: *[0-9]*' "$log" | grep -o '[0-9]*$' | tail -1)
  printf '%-14s %12s executions in %ss: %s\n' "$t" "${execs:-?}" "$secs" "$result"
done
exit $status
