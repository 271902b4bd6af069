#!/usr/bin/env bash
# Times covey against its targets and against a pandas/numpy/scipy reference script.
#
# Usage: tests/bench/run.sh [ROWS...]      (default series: 10000 100000 1000000 10000000)
# Environment: RUNS (default 5) timed runs per case; PYTHON (default .venv/bin/python if it
# exists, else python3) for the reference script, which needs pandas, numpy and scipy;
# set NO_REFERENCE=1 to skip it.
#
# Data are invented and generated deterministically (tests/bench/make_data.py, fixed seed)
# into target/bench/, which is not committed. Wall time (from the clock) and peak RSS (from
# /usr/bin/time -v) are medians of RUNS runs; hyperfine, when present, is run as well for its
# own summary of the million-row case.
set -euo pipefail

here="$(cd "$(dirname "${BASH_SOURCE[0]}")" && pwd)"
root="$(cd "$here/../.." && pwd)"
out="$root/target/bench"
runs="${RUNS:-5}"
rows_list=("$@")
if [ ${#rows_list[@]} -eq 0 ]; then
    rows_list=(10000 100000 1000000 10000000)
fi
python="${PYTHON:-}"
if [ -z "$python" ]; then
    if [ -x "$root/.venv/bin/python" ]; then python="$root/.venv/bin/python"; else python=python3; fi
fi

mkdir -p "$out/rendered"
if ! command -v hyperfine >/dev/null 2>&1 && [ "$(id -u)" = 0 ] && command -v apt-get >/dev/null; then
    apt-get install -y -q hyperfine >/dev/null 2>&1 || true
fi
if [ ! -x /usr/bin/time ] && [ "$(id -u)" = 0 ] && command -v apt-get >/dev/null; then
    apt-get install -y -q time >/dev/null 2>&1 || true
fi

(cd "$root" && cargo build --release -j 2 --quiet)
covey="$root/target/release/covey"

source "$here/measure.sh"

# Documents are rendered from target/bench so that their data path resolves there.
doc() { # doc TEMPLATE DATA OUT
    sed "s|\"DATA\"|\"$2\"|" "$here/$1" > "$3"
}

echo "## covey benchmark ($(date -u +%Y-%m-%dT%H:%MZ), $(nproc) cores, $runs runs, medians)"
echo
echo "| case | rows | file MB | wall s | peak MB | notes |"
echo "|---|---:|---:|---:|---:|---|"

read -r s m < <(measure "$covey" render "$root/worked/rations.md" --out "$out/rendered")
echo "| worked/rations.md | 30 | - | $s | $m | small document, output already current (not rewritten) |"
read -r s m < <(measure sh -c "rm -rf '$out/fresh' && '$covey' render '$root/worked/rations.md' --out '$out/fresh'")
echo "| worked/rations.md | 30 | - | $s | $m | small document, every file written and flushed to disk (includes sh and rm) |"

for rows in "${rows_list[@]}"; do
    data="$out/rows_$rows.csv"
    [ -f "$data" ] || python3 "$here/make_data.py" "$rows" "$data"
    mb="$(awk -v b="$(stat -c %s "$data")" 'BEGIN {printf "%.1f", b/1e6}')"
    doc load.md "rows_$rows.csv" "$out/load_$rows.md"
    doc large.md "rows_$rows.csv" "$out/large_$rows.md"
    read -r s m < <(measure "$covey" render "$out/load_$rows.md" --out "$out/rendered")
    rate="$(awk -v b="$mb" -v s="$s" 'BEGIN {if (s > 0) printf "%.0f MB/s", b/s; else print "-"}')"
    echo "| load only | $rows | $mb | $s | $m | $rate (includes start-up) |"
    read -r s m < <(measure "$covey" render "$out/large_$rows.md" --out "$out/rendered")
    per="$(awk -v m="$m" -v r="$rows" 'BEGIN {printf "%.0f B/row", m*1048576/r}')"
    echo "| large.md | $rows | $mb | $s | $m | $per |"
    if [ -z "${NO_REFERENCE:-}" ] && [ "$rows" -le 1000000 ]; then
        read -r s m < <(measure env -u OPENBLAS_CORETYPE -u OPENBLAS_L2_SIZE "$python" "$here/reference.py" "$data")
        echo "| reference.py (pandas/numpy/scipy) | $rows | $mb | $s | $m | load, 2 fits, F test |"
    fi
done

if [ -f "$out/large_1000000.md" ]; then
    read -r s m < <(measure env COVEY_THREADS=1 "$covey" render "$out/large_1000000.md" --out "$out/rendered")
    echo "| large.md, COVEY_THREADS=1 | 1000000 | - | $s | $m | one thread |"
fi

if command -v hyperfine >/dev/null 2>&1 && [ -f "$out/large_1000000.md" ] && [ -z "${NO_REFERENCE:-}" ]; then
    echo
    env -u OPENBLAS_CORETYPE -u OPENBLAS_L2_SIZE hyperfine -N --warmup 1 --runs "$runs" --style basic \
        "$covey render $out/large_1000000.md --out $out/rendered" \
        "$python $here/reference.py $out/rows_1000000.csv" 2>&1 | sed 's/^/    /'
fi
