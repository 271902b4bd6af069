#!/usr/bin/env bash
# Times covey loading a 100,000-row workbook (.xlsx) and a 1,000,000-row SQLite table, on
# one core (COVEY_THREADS=1, pinned with taskset when present). Not part of the tests.
#
# Usage: tests/bench/sources.sh        Environment: RUNS (default 5) runs per case.
# Data are invented (tests/bench/make_sources.py, fixed seed) into target/bench/. Wall time
# from the clock and peak RSS from /usr/bin/time -v are medians of RUNS runs (measure.sh).
set -euo pipefail
here="$(cd "$(dirname "${BASH_SOURCE[0]}")" && pwd)"
root="$(cd "$here/../.." && pwd)"
out="$root/target/bench"
runs="${RUNS:-5}"
mkdir -p "$out/rendered"
(cd "$root" && cargo build --release --quiet)
covey="$root/target/release/covey"
source "$here/measure.sh"
pin=()
command -v taskset >/dev/null && pin=(taskset -c 0)

[ -f "$out/rows_100000.xlsx" ] || python3 "$here/make_sources.py" xlsx 100000 "$out/rows_100000.xlsx"
[ -f "$out/rows_1000000.sqlite" ] || python3 "$here/make_sources.py" sqlite 1000000 "$out/rows_1000000.sqlite"
printf '# Workbook\n\n```covey\nload "rows_100000.xlsx" as bench\n```\n' >"$out/load_xlsx.md"
printf '# SQLite\n\n```covey\nload "rows_1000000.sqlite" table data as bench\n```\n' >"$out/load_sqlite.md"

echo "## covey data-source benchmark ($(date -u +%Y-%m-%dT%H:%MZ), one core, $runs runs, medians)"
echo
echo "| case | rows | file MB | wall s | peak MB |"
echo "|---|---:|---:|---:|---:|"
for case in "xlsx rows_100000.xlsx 100000" "sqlite rows_1000000.sqlite 1000000"; do
    read -r kind file rows <<<"$case"
    mb="$(awk -v b="$(stat -c %s "$out/$file")" 'BEGIN {printf "%.1f", b/1e6}')"
    read -r s m < <(measure env COVEY_THREADS=1 "${pin[@]}" "$covey" render "$out/load_$kind.md" --out "$out/rendered")
    echo "| load $kind | $rows | $mb | $s | $m |"
done
