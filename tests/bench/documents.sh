#!/usr/bin/env bash
# Times large documents (rather than large data): many live references, and a long analysis.
#
# Usage: tests/bench/documents.sh
# Environment: RUNS (default 3) timed runs per case.
#
# Cases, generated into target/bench/documents/ (not committed):
#   refs-N       N live references @[fit m r_squared] in prose, one paragraph each, for N = 25,000,
#                50,000 and 100,000: the time should grow in proportion to N.
#   refs-line-N  the same references in a single paragraph.
#   worked-21MB  worked/rations.md repeated to about 21 MB (its blocks, prose, references and
#                figures 4,287 times over): peak memory against the document and its outputs.
# Wall time (from the clock) and peak RSS (from /usr/bin/time -v) are medians of RUNS runs.
set -euo pipefail

here="$(cd "$(dirname "${BASH_SOURCE[0]}")" && pwd)"
root="$(cd "$here/../.." && pwd)"
out="$root/target/bench/documents"
runs="${RUNS:-3}"
mkdir -p "$out"
cp -r "$root/worked/data" "$out/"

(cd "$root" && cargo build --release -j 2 --quiet)
covey="$root/target/release/covey"

source "$here/measure.sh"

head_block='```covey
load "data/rations.csv" as pens
factor ration levels barley, maize, "maize+soy"
model m: final_kg on ration + start_kg
table fit m
```
'
printf '| case | document MB | wall s | peak MB |\n| :-- | --: | --: | --: |\n'
for n in 25000 50000 100000; do
    f="$out/refs-$n.md"
    { printf '# References\n\n%s\n' "$head_block"
      awk -v n="$n" 'BEGIN {for (i = 0; i < n; i++) printf "R² is @[fit m r_squared].\n\n"}'
    } > "$f"
    g="$out/refs-line-$n.md"
    { printf '# References\n\n%s\n' "$head_block"
      awk -v n="$n" 'BEGIN {for (i = 0; i < n; i++) printf "R² is @[fit m r_squared]. "; print ""}'
    } > "$g"
    for doc in "$f" "$g"; do
        mb="$(awk -v b="$(stat -c %s "$doc")" 'BEGIN {printf "%.1f", b / 1e6}')"
        read -r s m < <(measure "$covey" render "$doc")
        printf '| %s | %s | %s | %s |\n' "$(basename "$doc" .md)" "$mb" "$s" "$m"
    done
done

big="$out/worked-21MB.md"
python3 - "$root/worked/rations.md" "$big" <<'PY'
import sys
text = open(sys.argv[1], encoding="utf-8").read()
copies = 21_000_000 // len(text.encode("utf-8")) + 1
open(sys.argv[2], "w", encoding="utf-8").write(text * copies)
PY
mb="$(awk -v b="$(stat -c %s "$big")" 'BEGIN {printf "%.1f", b / 1e6}')"
read -r s m < <(measure "$covey" render "$big")
outputs="$(du -sm --apparent-size "$out/worked-21MB.rendered.md" "$out/worked-21MB.figures" | awk '{t += $1} END {print t}')"
printf '| worked-21MB (outputs %s MB) | %s | %s | %s |\n' "$outputs" "$mb" "$s" "$m"
