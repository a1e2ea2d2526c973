#!/usr/bin/env bash
# Creates bench/.venv and installs NumPy and SciPy from PyPI into it (nothing else).
set -euo pipefail
here="$(cd "$(dirname "${BASH_SOURCE[0]}")" && pwd)"
if [ ! -x "$here/.venv/bin/python" ]; then
    python3 -m venv "$here/.venv"
fi
"$here/.venv/bin/python" -m pip install --quiet --upgrade pip
"$here/.venv/bin/python" -m pip install --quiet numpy scipy
"$here/.venv/bin/python" -c 'import numpy, scipy; print("numpy", numpy.__version__, "scipy", scipy.__version__)'
