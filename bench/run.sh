#!/usr/bin/env bash
# Side-by-side benchmark of ringtrue against scipy's solve_ivp (see bench/README.md).
# Installs pinned numpy and scipy into bench/.venv, builds ringtrue in release mode, and runs
# side_by_side.py; extra arguments go to the script (e.g. --cases ladder1000,mesh100).
# Writes bench/out/table.md and bench/out/runs.csv.
set -euo pipefail
here="$(cd "$(dirname "$0")" && pwd)"
root="$(dirname "$here")"
python="${PYTHON:-python3}"
if [ ! -x "$here/.venv/bin/python" ]; then
  "$python" -m venv "$here/.venv"
fi
"$here/.venv/bin/pip" install --quiet --disable-pip-version-check -r "$here/requirements.txt"
(cd "$root" && cargo build --release --quiet)
target="${CARGO_TARGET_DIR:-$root/target}"
# One BLAS thread, so that neither tool gets more cores than the other.
export OPENBLAS_NUM_THREADS=1 OMP_NUM_THREADS=1 MKL_NUM_THREADS=1
exec "$here/.venv/bin/python" "$here/side_by_side.py" --ringtrue "$target/release/ringtrue" --out "$here/out" "$@"
