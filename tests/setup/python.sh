#!/usr/bin/env bash
# A private virtual environment in .venv with the reference libraries.
set -euo pipefail
cd "$(dirname "$0")/../.."
if [ -x .venv/bin/python ] && .venv/bin/python -c 'import numpy, scipy, pandas' 2>/dev/null; then
  echo "python reference libraries present"; exit 0
fi
python3 -m venv .venv
.venv/bin/pip install --quiet --disable-pip-version-check numpy scipy pandas
.venv/bin/python -c 'import numpy, scipy, pandas; print("numpy", numpy.__version__, "scipy", scipy.__version__, "pandas", pandas.__version__)'
