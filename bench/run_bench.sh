#!/usr/bin/env bash
# ringdown benchmark: ringdown's exact engine against scipy 1.10 (Debian 12) on the same
# state-space systems and output instants, in one run, printed as one table of ratios.
#
#   bench/run_bench.sh [--build DIR] [--no-memory] [--keep DIR]
#   (--build: the CMake build folder, default build/; --keep: leave the circuits, timings
#   and dumps in DIR instead of a temporary folder)
#
# What it does: writes the bench circuits (bench/lsim_bench.py write: a 4-state switch node
# with an RC snubber, 200- and 1000-state LC ladders, the 200-state ladder driven by a
# 1,000-cycle pulse train) into a temporary folder; times ringdown's engine on them
# (bench/engine_bench: parse, parsed circuit -> last sample in memory, per-sample cost,
# the bare matrix-vector floor); times CSV writing through the ringdown binary (--csv to a
# temporary file, against the same run without it); takes /usr/bin/time -v peak memory
# of the large runs; then bench/lsim_bench.py compare times scipy.signal.lsim and
# solve_ivp(Radau) on the same systems, computes errors against an exact mpmath reference,
# and prints the table. Both sides run single-threaded (BLAS threads pinned to 1).
#
# What it does not: build anything but the engine_bench target (when it is missing), or
# pass/fail (targets are printed beside the ratios). Run it on a quiet machine: every
# figure is a ratio within this one run, but a loaded machine still adds noise.
set -euo pipefail

ROOT="$(cd "$(dirname "$0")/.." && pwd)"
BUILD="${BUILD_DIR:-$ROOT/build}"
PY=/usr/bin/python3   # Debian's numpy/scipy/mpmath, not a PATH python
MEMORY=1
KEEP=""
while (($#)); do
  case "$1" in
    --build) BUILD="$2"; shift ;;
    --build=*) BUILD="${1#--build=}" ;;
    --no-memory) MEMORY=0 ;;
    --keep) KEEP="$2"; shift ;;
    -h|--help) sed -n '2,23p' "$0"; exit 0 ;;
    *) echo "run_bench.sh: unknown option $1 (try --help)" >&2; exit 2 ;;
  esac
  shift
done

export OPENBLAS_NUM_THREADS=1 OMP_NUM_THREADS=1 MKL_NUM_THREADS=1

BENCH="$BUILD/bench/engine_bench"
if [ ! -x "$BENCH" ]; then
  cmake --build "$BUILD" --target engine_bench
fi
RINGDOWN=""
for candidate in "$BUILD/ringdown" "$BUILD/cli/ringdown"; do
  if [ -x "$candidate" ]; then RINGDOWN="$candidate"; break; fi
done

if [ -n "$KEEP" ]; then
  WORK="$KEEP"; mkdir -p "$WORK"
else
  WORK="$(mktemp -d "${TMPDIR:-/tmp}/ringdown-bench.XXXXXX")"
  trap 'rm -rf "$WORK"' EXIT
fi

"$PY" "$ROOT/bench/lsim_bench.py" write "$WORK"

echo "engine timings ..." >&2
{
  "$BENCH" run "$WORK/snubber4.rlc" --reps 3 --dump "$WORK/snubber4.bin"
  "$BENCH" run "$WORK/snubber4_dc.rlc" --reps 3 --marginal
  "$BENCH" run "$WORK/ladder200.rlc" --reps 3 --marginal --dump "$WORK/ladder200.bin"
  "$BENCH" run "$WORK/ladder200_pulse.rlc" --reps 3
  "$BENCH" run "$WORK/ladder1000.rlc" --reps 1 --marginal --dump "$WORK/ladder1000.bin"
  "$BENCH" matvec 5 --fixed   # snubber4_dc: 4 states + the unit input state
  "$BENCH" matvec 200
  "$BENCH" matvec 1000
} > "$WORK/engine.txt"

# CSV writing: the same run with and without --csv; the difference is the writing.
: > "$WORK/csv.txt"
if [ -n "$RINGDOWN" ]; then
  echo "CSV writing through $RINGDOWN ..." >&2
  t0=$EPOCHREALTIME
  "$RINGDOWN" run "$WORK/snubber4.rlc" --quiet --no-progress > /dev/null || true
  t1=$EPOCHREALTIME
  "$RINGDOWN" run "$WORK/snubber4.rlc" --quiet --no-progress --csv "$WORK/out.csv" > /dev/null || true
  t2=$EPOCHREALTIME
  if [ -s "$WORK/out.csv" ]; then
    "$PY" -c "import sys; a,b,c = map(float, sys.argv[1:]); print(f'key=nocsv seconds={b-a:.6f}'); print(f'key=csv seconds={c-b:.6f}')" \
      "$t0" "$t1" "$t2" >> "$WORK/csv.txt"
  fi
  rm -f "$WORK/out.csv"
fi

# Peak memory of the large runs (/usr/bin/time -v, "Maximum resident set size").
: > "$WORK/memory.txt"
if [ "$MEMORY" = 1 ] && [ -x /usr/bin/time ]; then
  echo "memory ..." >&2
  peak() {  # peak KEY COMMAND...
    local key="$1"; shift
    /usr/bin/time -v "$@" > /dev/null 2> "$WORK/time.txt" || true
    local kb
    kb=$(sed -n 's/.*Maximum resident set size (kbytes): *//p' "$WORK/time.txt")
    [ -n "$kb" ] && echo "key=$key kb=$kb" >> "$WORK/memory.txt"
  }
  peak ringdown_engine_ladder1000_2000_samples "$BENCH" run "$WORK/ladder1000.rlc"
  peak scipy_lsim_ladder1000_2000_samples_with_python_model \
    "$PY" "$ROOT/bench/lsim_bench.py" lsim "$WORK" ladder1000
  peak ringdown_engine_snubber4_1e6_samples_in_memory "$BENCH" run "$WORK/snubber4.rlc"
  if [ -n "$RINGDOWN" ]; then
    peak ringdown_run_csv_snubber4_1e6_rows \
      "$RINGDOWN" run "$WORK/snubber4.rlc" --quiet --no-progress --csv "$WORK/out.csv"
  fi
fi

echo "scipy timings ..." >&2
"$PY" "$ROOT/bench/lsim_bench.py" compare "$WORK"
