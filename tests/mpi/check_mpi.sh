#!/usr/bin/env bash
# The MPI build's check (docs/cluster.md): shipped examples run serially and on 2 ranks of
# mpirun on this machine must give byte-identical outputs: the --csv table, the
# --csv-signals waveforms, the summary (apart from its "runs" line, which has the timing and
# the rank count), the warnings, and the exit code; `check` must exit alike on every rank.
#   bash tests/mpi/check_mpi.sh BUILD-MPI/ringdown [REPO]
# Fails (exit 1) on the first difference, and prints it.
set -euo pipefail
bin="$(realpath "$1")"
repo="$(realpath "${2:-$(dirname "$0")/../..}")"
cd "$repo"
work="$(mktemp -d)"
trap 'rm -rf "$work"' EXIT

# Open MPI 4.1 refuses to start as root unless both are set, and on a container with fewer
# cores than ranks needs --oversubscribe (Open MPI 4.1 mpirun(1)).
if [ "$(id -u)" -eq 0 ]; then export OMPI_ALLOW_RUN_AS_ROOT=1 OMPI_ALLOW_RUN_AS_ROOT_CONFIRM=1; fi
mpi=(mpirun --oversubscribe -np 2)
status=0

# compare NAME ARGS...: serial and 2-rank runs of `ringdown ARGS`, files written in $work/NAME.*
compare() {
  local name="$1"; shift
  local s="$work/$name.serial" m="$work/$name.mpi" rs=0 rm=0
  mkdir -p "$s" "$m"
  (cd "$s" && "$bin" "$@" --no-progress >stdout 2>stderr) || rs=$?
  (cd "$m" && timeout 300 "${mpi[@]}" "$bin" "$@" --no-progress >stdout 2>stderr) || rm=$?
  ok=1
  if [ "$rs" != "$rm" ]; then echo "check_mpi: $name: exit code $rs serial, $rm on 2 ranks"; ok=0; fi
  for f in table.csv signals.csv hist.svg; do
    if [ -e "$s/$f" ] || [ -e "$m/$f" ]; then
      cmp "$s/$f" "$m/$f" || { echo "check_mpi: $name: $f differs"; ok=0; }
    fi
  done
  grep -v '^  runs ' "$s/stdout" >"$s/summary" || true
  grep -v '^  runs ' "$m/stdout" >"$m/summary" || true
  # The 2-rank run must really have used 2 ranks (a sweep's summary says so).
  if grep -q '^  runs ' "$m/stdout" && ! grep -q '^  runs .* on each of 2 ranks' "$m/stdout"; then
    echo "check_mpi: $name: the run did not use 2 ranks: $(grep '^  runs ' "$m/stdout")"; ok=0
  fi
  diff "$s/summary" "$m/summary" || { echo "check_mpi: $name: the summary differs"; ok=0; }
  diff "$s/stderr" "$m/stderr" || { echo "check_mpi: $name: the warnings differ"; ok=0; }
  if [ "$ok" = 1 ]; then
    echo "check_mpi: $name: identical (exit $rs)"
  else
    status=1
  fi
}

# Trials (a shipped example with `trials runs=200`), one thread per rank and two.
compare trials run "$repo/circuits/mains_bleeder.rlc" --every 100ms --csv table.csv --jobs 1
compare trials-threads run "$repo/circuits/mains_bleeder.rlc" --every 100ms --csv table.csv --jobs 2 --accept-mains-risk \
  --histogram hist.svg
# A sweep given by --set NAME=LIST on a shipped example, with the waveforms of every point.
compare sweep run "$repo/circuits/flyback_snubber.rlc" --set 'Rsnub=e12(22Ohm, 220Ohm)' \
  --csv table.csv --csv-signals signals.csv --jobs 1
# check: the same exit code on every rank (the examples' own limits).
compare check check "$repo"/circuits/*.rlc --jobs 2
exit "$status"
