#!/bin/sh
# Load benchmark: generate a 100,000-element ladder (bench/gen_large_netlist.py)
# into a temporary directory and time `ringdown inspect` on it, printing the
# elapsed wall time and the peak resident memory reported by GNU time.
# Usage: bench/parse_bench.sh [ELEMENTS]   (run from the repository root;
# RINGDOWN_BIN overrides the binary, default build/ringdown)
set -eu
elements="${1:-100000}"
here="$(cd "$(dirname "$0")" && pwd)"
bin="${RINGDOWN_BIN:-build/ringdown}"
if [ ! -x "$bin" ]; then
  echo "parse_bench: no ringdown binary at $bin (build first or set RINGDOWN_BIN)" >&2
  exit 2
fi
if [ ! -x /usr/bin/time ]; then
  echo "parse_bench: /usr/bin/time (GNU time) is needed for the memory figure" >&2
  exit 2
fi
python="${PYTHON:-/usr/bin/python3}"
work="$(mktemp -d)"
trap 'rm -rf "$work"' EXIT INT TERM

for layout in flat blocks; do
  file="$work/ladder_$layout.rlc"
  if [ "$layout" = flat ]; then
    "$python" "$here/gen_large_netlist.py" --elements "$elements" --flat -o "$file"
  else
    "$python" "$here/gen_large_netlist.py" --elements "$elements" -o "$file"
  fi
  status=0
  /usr/bin/time -v "$bin" inspect "$file" > /dev/null 2> "$work/time.txt" || status=$?
  elapsed="$(sed -n 's/^.*Elapsed (wall clock) time.*): //p' "$work/time.txt")"
  rss="$(sed -n 's/^[[:space:]]*Maximum resident set size (kbytes): //p' "$work/time.txt")"
  printf '%-7s elements=%s lines=%s bytes=%s exit=%s elapsed=%s max_rss=%s kB\n' \
    "$layout" "$elements" "$(wc -l < "$file")" "$(wc -c < "$file")" "$status" "$elapsed" "$rss"
  if [ "$status" -ne 0 ]; then
    echo "--- ringdown inspect stderr (first lines):" >&2
    grep -v '^[[:space:]]' "$work/time.txt" | head -20 >&2 || true
  fi
done
