#!/usr/bin/env bash
# How `fickfit fit` scales with the number of data points (10^3 to 10^6) and with the number of
# cells: builds fickfit in release mode and runs bench/scaling.py (Python standard library only).
set -euo pipefail
here="$(cd "$(dirname "${BASH_SOURCE[0]}")" && pwd)"
(cd "$here/.." && cargo build --release --quiet)
exec python3 "$here/scaling.py" "$@"
