#!/usr/bin/env bash
# Whole-process figures of `octocut mesh` (load, mesh, validate, quality, write binary VTU/VTP,
# PNG and report) on an external box around a ~100k-triangle UV sphere, at two surface sizes
# giving about 2M and 8M cells. Prints cells, wall seconds, cells/s, peak RSS and bytes per cell.
#
#   benches/whole-process.sh            (uses $CARGO_TARGET_DIR or ./target)
#   SIZES="0.01 0.005" benches/whole-process.sh   (other sizes; NO_BUILD=1 skips the build)
#
# Needs GNU time at /usr/bin/time (`apt-get install -y time`) and jq.
set -euo pipefail
ROOT=$(cd "$(dirname "$0")/.." && pwd)
TARGET=${CARGO_TARGET_DIR:-$ROOT/target}
WORK=${WORK:-$(mktemp -d /tmp/octocut-whole.XXXXXX)}
# unit sphere in [-5, 5]^3, base cells of 1.0 (10^3 base cells)
DOMAIN=${DOMAIN:--5,-5,-5,5,5,5}
BASE=${BASE:-1.0}
# ~3.6M and ~14M leaves by --dry-run, of which about half are fluid: ~1.9M and ~7.5M cells
SIZES=${SIZES:-"0.005 0.0025"}

[ -n "${NO_BUILD:-}" ] || (cd "$ROOT" && cargo build --release -q -p octocut-cli && cargo build --release -q -p octocut-surface --example make_body)
BIN=$TARGET/release/octocut
"$TARGET/release/examples/make_body" "$WORK/body.stl" sphere

echo "machine: $(nproc) cores; load before: $(uptime | sed 's/.*load average: //')"
printf '%-8s %10s %10s %9s %12s %11s %9s\n' size est_cells cells wall_s cells_per_s max_rss_MiB B_per_cell
for h in $SIZES; do
  est=$("$BIN" mesh --surface "$WORK/body.stl" --domain="$DOMAIN" --base-size "$BASE" \
        --surface-size "$h" --dry-run --json --quiet | jq '.estimated_cells')
  out="$WORK/out-$h"
  set +e
  /usr/bin/time -v -o "$WORK/time-$h.txt" "$BIN" mesh --surface "$WORK/body.stl" \
      --domain="$DOMAIN" --base-size "$BASE" --surface-size "$h" --out "$out" --quiet --json \
      > "$WORK/report-$h.json" 2> "$WORK/stderr-$h.txt"
  rc=$?
  set -e
  if [ $rc -ne 0 ]; then
    echo "surface size $h: octocut mesh failed with exit code $rc:"
    cat "$WORK/stderr-$h.txt"
    grep -E 'Maximum resident|Elapsed' "$WORK/time-$h.txt" || true
    continue
  fi
  cells=$(jq '.cells.total' "$WORK/report-$h.json")
  wall=$(jq '[.stages[].seconds] | add' "$WORK/report-$h.json")
  # wall clock of the whole process from GNU time (h:mm:ss or m:ss.ss)
  elapsed=$(sed -n 's/.*Elapsed (wall clock) time (h:mm:ss or m:ss): //p' "$WORK/time-$h.txt" |
            awk -F: '{ if (NF == 3) print $1*3600 + $2*60 + $3; else print $1*60 + $2 }')
  # octocut resets the kernel's high-water mark at each stage (per-stage peaks in the report),
  # which GNU time's figure shares: the process peak is the larger of it and the stage peaks
  time_kb=$(sed -n 's/.*Maximum resident set size (kbytes): //p' "$WORK/time-$h.txt")
  stage_kb=$(jq '[.stages[].peak_memory_bytes] | max / 1024 | floor' "$WORK/report-$h.json")
  rss_kb=$(( time_kb > stage_kb ? time_kb : stage_kb ))
  awk -v h="$h" -v est="$est" -v c="$cells" -v t="$elapsed" -v r="$rss_kb" 'BEGIN {
    printf "%-8s %10d %10d %9.2f %12.0f %11.0f %9.0f\n", h, est, c, t, c / t, r / 1024, r * 1024 / c }'
  echo "  stages:" $(jq -r '.stages[] | "\(.stage) \(.seconds*100|round/100)s"' "$WORK/report-$h.json" | tr '\n' ' ')
  echo "  valid: $(jq '.valid' "$WORK/report-$h.json"); stage seconds sum $wall; output $(du -sh "$out" | cut -f1)"
  rm -rf "$out"
done
echo "load after: $(uptime | sed 's/.*load average: //')"
echo "work dir: $WORK"
