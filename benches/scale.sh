#!/usr/bin/env bash
# End-to-end scale figures for the README's Performance table: synthetic projects of
# 10k / 100k phrases × 64 d (diagonal) and 5k × 32 (full covariance), each command timed
# RUNS times (median wall time) with peak memory from /usr/bin/time -v.
# Usage: bash benches/scale.sh [RUNS]   (after cargo build --release)
set -euo pipefail
cd "$(dirname "$0")/.."
RUNS=${1:-3}
BIN=target/release/treewright
WORK=$(mktemp -d)
trap 'rm -rf "$WORK"' EXIT

median() { sort -n | awk '{a[NR]=$1} END {print a[int((NR+1)/2)]}'; }

measure() { # name, command...
  local name=$1; shift
  local walls=() mem=0
  for _ in $(seq "$RUNS"); do
    /usr/bin/time -v "$@" >/dev/null 2>"$WORK/time.txt" || { cat "$WORK/time.txt" >&2; return 1; }
    local w m
    w=$(awk -F': ' '/Elapsed \(wall clock\)/ {split($2,t,":"); s=0; for(i=1;i<=length(t);i++) s=s*60+t[i]; print s}' "$WORK/time.txt")
    m=$(awk -F': ' '/Maximum resident set size/ {print $2}' "$WORK/time.txt")
    walls+=("$w"); [ "$m" -gt "$mem" ] && mem=$m
  done
  printf '| %s | %s s | %s MiB |\n' "$name" "$(printf '%s\n' "${walls[@]}" | median)" "$((mem / 1024))"
}

echo "| step | median wall | peak RSS |"
echo "|---|---|---|"
SPECS=("10000 64 diag 3" "100000 64 diag 3" "5000 32 full 3")
# the 1 000 000 × 64 row (issue 17, part 7; 4 cluster levels) runs late and only with
# SCALE_MILLION=1: the audit and the builds once each (they take minutes), the other steps
# RUNS times, and the frame bench at that size (FRAME_PROJECT); needs ~1.2 GiB in $TMPDIR
[ "${SCALE_MILLION:-0}" = 1 ] && SPECS+=("1000000 64 diag 4")
for spec in "${SPECS[@]}"; do
  set -- $spec
  n=$1 d=$2 kind=$3 depth=$4
  dir="$WORK/p-$n-$d-$kind"
  extra=(); [ "$kind" = full ] && extra=(--full)
  $BIN sample --synthetic "$n" --dim "$d" --branching 10 --depth "$depth" "${extra[@]}" --out "$dir" >/dev/null
  raw=$(( n * d * 4 * 2 )); [ "$kind" = full ] && raw=$(( n * d * 4 + n * d * d * 8 ))
  echo "| **$n × $d $kind** (raw embedding bytes $((raw / 1048576)) MiB) | | |"
  runs=$RUNS
  measure "load (info)" $BIN info "$dir"
  # 200 reparent edits (leaves between clusters), then apply
  ids=$(python3 -c "import json;p=json.load(open('$dir/tree.json'))['parent'];l=[c for c in p if c.startswith('leaf')];print(' '.join(l[:200]))")
  parents=$(python3 -c "import json;p=json.load(open('$dir/tree.json'))['parent'];c=sorted(set(v for k,v in p.items() if k.startswith('leaf')));print(' '.join(c[:200]))")
  if [ "$n" = 1000000 ]; then
    # each `edit` loads the whole project (seconds at this size): the 200 edits are written
    # as a version-1 override file (no hash chain), the same edits the loop below records,
    # and one more edit is recorded and timed through the CLI (it rewrites the file as v2)
    python3 - "$dir" $parents -- $ids <<'PY'
import json, sys
d, rest = sys.argv[1], sys.argv[2:]
cut = rest.index("--")
parents, ids = rest[:cut], rest[cut + 1:]
edits = [{"op": "reparent", "node": c, "parent": parents[((i + 1) * 7) % len(parents)],
          "author": "scale", "time": "2026-01-01T00:00:00Z"} for i, c in enumerate(ids)]
json.dump({"format": "treewright-overrides", "version": 1, "edits": edits},
          open(f"{d}/overrides.json", "w"), indent=2)
PY
    set -- $parents
    RUNS=1
    for id in $(echo $ids | cut -d' ' -f1-"$runs"); do
      measure "record one more edit (edit)" $BIN edit "$dir" reparent "$id" "$1" --author scale
    done
    RUNS=$runs
  else
    set -- $parents; np=$#
    i=0
    for id in $ids; do
      i=$((i + 1)); idx=$(( (i * 7) % np + 1 )); par=${!idx}
      $BIN edit "$dir" reparent "$id" "$par" --author scale >/dev/null 2>&1 || true
    done
  fi
  measure "apply ($(python3 -c "import json;print(len(json.load(open('$dir/overrides.json'))['edits']))") edits)" $BIN apply "$dir" --out "$WORK/eff.json"
  [ "$n" = 1000000 ] && RUNS=1
  measure "full audit" $BIN audit "$dir" --format json --out "$WORK/audit.json"
  measure "build" $BIN build "$dir" --out "$WORK/tree.json" --report "$WORK/report.json"
  if [ "$n" = 1000000 ]; then
    root=$(python3 -c "import json;print(json.load(open('$dir/tree.json'))['root'])")
    measure "divisive build" $BIN build "$dir" --method divisive --out "$WORK/tree-div.json" --report "$WORK/report-div.json"
    RUNS=$runs measure "suggestion for the root" $BIN suggest "$dir" "$root" --json
    rm -f "$WORK"/tree*.json "$WORK"/report*.json "$WORK/eff.json" "$WORK/audit.json"
    # the release test profile (what `cargo test --release` built), in benchmark mode
    echo "| frame, tree fully expanded (benches/frame.rs with FRAME_PROJECT) | see below | |"
    FRAME_PROJECT="$dir" cargo test --release --locked --bench frame -- --bench --noplot 2>&1 |
      grep -E "opened and audited|drew 3 frames|time:" | sed 's/^/    /'
  fi
  RUNS=$runs
done

# `treewright fit` streaming its input (needs numpy and pyarrow for the generator; skipped
# without them): 1 M and 10 M occurrences × 64 d over 10 000 phrases.
if python3 -c "import numpy, pyarrow" 2>/dev/null; then
  echo "| **fit** (occurrences × 64 d, 10 000 phrases) | | |"
  for rows in 1000000 10000000; do
    python3 benches/fit/make_occurrences.py "$rows" 64 10000 "$WORK/occ-$rows"
    measure "fit $rows Parquet, diagonal" $BIN fit "$WORK/occ-$rows/occ.parquet" --out "$WORK/fit"
    rm -rf "$WORK/fit"
    measure "fit $rows .npy + ids, diagonal" $BIN fit "$WORK/occ-$rows/occ.npy" --ids "$WORK/occ-$rows/occ_ids.json" --out "$WORK/fit"
    rm -rf "$WORK/fit"
    measure "fit $rows Parquet, full (Ledoit–Wolf)" $BIN fit "$WORK/occ-$rows/occ.parquet" --full --out "$WORK/fit"
    rm -rf "$WORK/fit" "$WORK/occ-$rows"
  done
fi

# Flat trees (issue 17, part 6): N phrases of `sample --synthetic N --dim 64 --branching 10
# --depth 3`, every one then placed directly under the root (`misfit.py flat`, needs numpy);
# the full audit's median wall time and CPU time (user + sys, steadier than the wall time
# on a shared machine) and the CPU ratio to the row above (n log n: ≈ 2.1–2.3 per
# doubling). Skip with SCALE_FLAT=0.
if [ "${SCALE_FLAT:-1}" = 1 ] && python3 -c "import numpy" 2>/dev/null; then
  echo "| **flat tree** (all under the root, × 64 diag) | median wall / CPU | peak RSS / CPU ratio per doubling |"
  prev=""
  for n in 5000 10000 20000 40000; do
    dir="$WORK/flat-$n"
    $BIN sample --synthetic "$n" --dim 64 --branching 10 --depth 3 --out "$dir" >/dev/null
    python3 benches/misfit.py flat "$dir"
    walls=() cpus=() mem=0
    for _ in $(seq "$RUNS"); do
      /usr/bin/time -v $BIN audit "$dir" --format json --out "$WORK/audit.json" >/dev/null 2>"$WORK/time.txt" || { cat "$WORK/time.txt" >&2; exit 1; }
      walls+=("$(awk -F': ' '/Elapsed \(wall clock\)/ {split($2,t,":"); s=0; for(i=1;i<=length(t);i++) s=s*60+t[i]; print s}' "$WORK/time.txt")")
      cpus+=("$(awk -F': ' '/User time/ {u=$2} /System time/ {s=$2} END {printf "%.2f", u+s}' "$WORK/time.txt")")
      m=$(awk -F': ' '/Maximum resident set size/ {print $2}' "$WORK/time.txt"); [ "$m" -gt "$mem" ] && mem=$m
    done
    cpu=$(printf '%s\n' "${cpus[@]}" | median)
    ratio="—"; [ -n "$prev" ] && ratio=$(awk -v a="$cpu" -v b="$prev" 'BEGIN {printf "%.2f×", a / b}')
    printf '| full audit, %s under the root | %s s / %s s | %s MiB / %s |\n' "$n" "$(printf '%s\n' "${walls[@]}" | median)" "$cpu" "$((mem / 1024))" "$ratio"
    prev=$cpu
    rm -rf "$dir"
  done
fi
