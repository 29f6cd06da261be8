#!/usr/bin/env bash
# Build the Python package (crates/eccaudit-py, PyO3 + maturin) into a throw-away venv under
# target/ and run its pytest suite against the command line built by `cargo build --release`.
#
#   scripts/test-python.sh
#
# The venv (target/py-venv) gets the pinned tools of crates/eccaudit-py/requirements-test.txt
# from PyPI once; later runs only rebuild the extension (cargo's cache in target/ is shared).
set -euo pipefail
cd "$(dirname "$0")/.."

log() { printf '[test-python] %s\n' "$*" >&2; }

VENV=target/py-venv
REQS=crates/eccaudit-py/requirements-test.txt
PYTHON="${PYTHON:-python3}"
if [[ ! -x $VENV/bin/python ]] || ! cmp -s "$REQS" "$VENV/requirements-test.txt"; then
  log "creating $VENV with $REQS (PyPI)"
  rm -rf "$VENV"
  "$PYTHON" -m venv "$VENV"
  "$VENV/bin/pip" install --quiet --disable-pip-version-check -r "$REQS"
  cp "$REQS" "$VENV/requirements-test.txt"
fi

log "cargo build --release (the command line the tests compare with)"
cargo build --release --quiet --bin eccaudit

log "pip install ./crates/eccaudit-py (maturin as the PEP 517 backend)"
PATH="$PWD/$VENV/bin:$PATH" "$VENV/bin/pip" install --quiet --disable-pip-version-check \
  --no-build-isolation --force-reinstall --no-deps ./crates/eccaudit-py

log "pytest crates/eccaudit-py/tests"
ECCAUDIT_BIN="$PWD/target/release/eccaudit" MPLBACKEND=Agg \
  "$VENV/bin/python" -m pytest -q -p no:cacheprovider crates/eccaudit-py/tests
