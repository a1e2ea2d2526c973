#!/usr/bin/env bash
# Side-by-side of fickfit and the SciPy script (bench/scipy_fit.py) on every bundled sample:
# builds fickfit in release mode, runs both alternately REPEATS times (default 5), prints the
# estimates, standard errors, their agreement, median wall times and the ratio, then times
# `fickfit fit --profile` on each sample. Needs bench/setup.sh to have been run once.
set -euo pipefail
here="$(cd "$(dirname "${BASH_SOURCE[0]}")" && pwd)"
root="$(dirname "$here")"
py="$here/.venv/bin/python"
if [ ! -x "$py" ]; then
    echo "bench/.venv is missing: run bench/setup.sh first" >&2
    exit 1
fi
(cd "$root" && cargo build --release --quiet)
exec "$py" "$here/compare.py" --repeats "${REPEATS:-5}" "$@"
