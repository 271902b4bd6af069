#!/usr/bin/env bash
# Times the language server's check of a 1,000-line document on one core: see
# tests/bench/lsp_latency.rs for what is measured. Prints a Markdown table.
#
# Usage: tests/bench/lsp.sh
set -euo pipefail

root="$(cd "$(dirname "${BASH_SOURCE[0]}")/../.." && pwd)"
cd "$root"
cargo bench --bench lsp_latency --no-run -j 2 --quiet
pin=()
if command -v taskset >/dev/null 2>&1; then
    pin=(taskset -c 0)
else
    echo "taskset not found: not pinned to one core (the check runs on one thread anyway)" >&2
fi
COVEY_THREADS=1 "${pin[@]}" cargo bench --bench lsp_latency --quiet
