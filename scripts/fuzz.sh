#!/usr/bin/env bash
# Coverage-guided fuzzing of termvel's parsers with cargo-fuzz (libFuzzer).
#
#   scripts/fuzz.sh [SECONDS_PER_TARGET] [TARGET...]
#   FUZZ_RUNS=10000000 FUZZ_SANITIZER=none scripts/fuzz.sh 3600
#                                                 # the long runs
#
# Builds every fuzz target in fuzz/ once (release with debug assertions and
# overflow checks, AddressSanitizer: cargo fuzz's default) and runs each for
# SECONDS_PER_TARGET seconds (default 60), or until FUZZ_RUNS executions if
# that comes first, FUZZ_JOBS targets at a time (default: one per core), starting from
# the committed seeds in fuzz/seeds/<target>/ and fuzz/regressions/<target>/
# (inputs that once crashed it) plus whatever an earlier run
# left in fuzz/corpus/<target>/. Prints per target the executions done and
# exec/s; exits non-zero if any target crashed, hung (> 10 s on one input)
# or went over 512 MB, leaving the input in fuzz/artifacts/<target>/.
# FUZZ_SANITIZER=none builds without AddressSanitizer (two to three times
# the executions a second; the parsers are safe Rust, where bounds and
# overflow checks, kept on, catch what ASan would). Installs cargo-fuzz when
# it is missing. The toolchain is stable:
# RUSTC_BOOTSTRAP=1 lets cargo-fuzz use the nightly flags it needs.
set -euo pipefail
cd "$(dirname "$0")/.."

secs=${1:-60}
shift || true
case $secs in
  '' | *[!0-9]*)
    echo "usage: scripts/fuzz.sh [SECONDS_PER_TARGET] [TARGET...]" >&2
    exit 2
    ;;
esac

export RUSTC_BOOTSTRAP=1
export PATH="$HOME/.cargo/bin:$PATH"
if ! cargo fuzz --version >/dev/null 2>&1; then
  echo "fuzz: installing cargo-fuzz"
  cargo install cargo-fuzz --locked
fi

# Target, then the longest input libFuzzer may make for it, then its dictionary.
all_targets=(
  "candump 600 candump.dict"
  "recording 16384 recording.dict"
  "nmea 160 nmea.dict"
  "slcan 512 slcan.dict"
  "lines 400 lines.dict"
  "can_decode 512 -"
  "decoder 1024 -"
  "config 8192 config.dict"
  "signals 8192 config.dict"
)
if (($# > 0)); then
  selected=()
  for want in "$@"; do
    found=""
    for spec in "${all_targets[@]}"; do
      [ "${spec%% *}" = "$want" ] && found=$spec
    done
    [ -n "$found" ] || { echo "fuzz: no target $want" >&2; exit 2; }
    selected+=("$found")
  done
else
  selected=("${all_targets[@]}")
fi

jobs=${FUZZ_JOBS:-$(nproc)}
sanitizer=${FUZZ_SANITIZER:-address}

cd fuzz
echo "fuzz: building the targets (sanitizer: $sanitizer)"
cargo fuzz build --sanitizer "$sanitizer"
bin_dir="target/$(rustc -vV | sed -n 's/^host: //p')/release"
# As `cargo fuzz run` sets it.
export ASAN_OPTIONS="${ASAN_OPTIONS:+$ASAN_OPTIONS:}detect_odr_violation=0"

mkdir -p logs
# One target: its run, then one line of results in logs/<target>.result.
run_target() {
  local target=$1 max_len=$2 dict=$3
  mkdir -p "corpus/$target" "artifacts/$target"
  local args=(-max_total_time="$secs" -rss_limit_mb=512 -timeout=10 -max_len="$max_len" -print_final_stats=1
    -artifact_prefix="artifacts/$target/")
  [ -n "${FUZZ_RUNS:-}" ] && args+=(-runs="$FUZZ_RUNS")
  [ "$dict" != - ] && args+=(-dict="dict/$dict")
  echo "fuzz: $target for ${secs}s${FUZZ_RUNS:+ or $FUZZ_RUNS runs}"
  local log="logs/$target.log" start result
  start=$(date +%s)
  # The binary cargo fuzz built (what `cargo fuzz run` runs, without
  # rebuilding between targets).
  local dirs=("corpus/$target" "seeds/$target")
  # Inputs that once crashed a target (kept apart: make_seeds.py rewrites seeds/).
  [ -d "regressions/$target" ] && dirs+=("regressions/$target")
  if "$bin_dir/$target" "${args[@]}" "${dirs[@]}" >"$log" 2>&1; then
    result=ok
  else
    result=FAILED
    grep -E 'panicked at|ERROR: libFuzzer|ERROR: AddressSanitizer|Test unit written to' "$log" | head -5 || true
    echo "fuzz: $target failed; full output in fuzz/$log"
  fi
  local execs rate corpus
  execs=$(grep -o 'stat::number_of_executed_units: *[0-9]*' "$log" | grep -o '[0-9]*$' | tail -1 || true)
  rate=$(grep -o 'stat::average_exec_per_sec: *[0-9]*' "$log" | grep -o '[0-9]*$' | tail -1 || true)
  corpus=$(find "corpus/$target" -type f | wc -l)
  printf '%-12s %12s %10s %8s %7ss  %s\n' "$target" "${execs:-?}" "${rate:-?}" "$corpus" "$(($(date +%s) - start))" \
    "$result" | tee "logs/$target.result"
}

for spec in "${selected[@]}"; do
  read -r target _ _ <<<"$spec"
  rm -f "logs/$target.result"
done
for spec in "${selected[@]}"; do
  while (($(jobs -rp | wc -l) >= jobs)); do
    wait -n || true
  done
  # shellcheck disable=SC2086 # the spec is three words
  run_target $spec &
done
wait

failed=()
{
  printf '%-12s %12s %10s %8s %8s  %s\n' target executions exec/s corpus time result
  for spec in "${selected[@]}"; do
    read -r target _ _ <<<"$spec"
    if [ -f "logs/$target.result" ]; then
      cat "logs/$target.result"
    else
      printf '%-12s did not report\n' "$target"
    fi
  done
} >logs/summary.txt
for spec in "${selected[@]}"; do
  read -r target _ _ <<<"$spec"
  grep -qs ' ok$' "logs/$target.result" || failed+=("$target")
done
echo
cat logs/summary.txt
if ((${#failed[@]})); then
  echo "fuzz: FAILED: ${failed[*]}; the inputs are in fuzz/artifacts/TARGET/"
  echo "fuzz: minimise one with: cd fuzz && RUSTC_BOOTSTRAP=1 cargo fuzz tmin TARGET artifacts/TARGET/crash-..."
  exit 1
fi
echo "fuzz: all ${#selected[@]} targets ran without a crash (at most ${secs}s each)"
