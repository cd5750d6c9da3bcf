#!/usr/bin/env bash
# The Python module's tests: install the module from this checkout into a fresh virtual
# environment (as a user would, `pip install ./python`), then run pytest on python/tests.
# Needs Python >= 3.9 with venv and pip (installed from Debian's packages when missing and
# running as root) and a Rust toolchain; pip fetches maturin, numpy and pytest from PyPI.
#
#   bash tests/python.sh            # release build, as users get it
#   SEEDLINE_PY_PROFILE=dev bash tests/python.sh   # reuse the dev-profile build (CI)
set -euo pipefail
cd "$(dirname "$0")/.."
root=$(pwd)

python=${PYTHON:-python3}
if ! "$python" -c 'import venv, ensurepip' 2>/dev/null; then
    if [ "$(id -u)" = 0 ] && command -v apt-get >/dev/null; then
        apt-get update -qq && apt-get install -y -qq python3-venv python3-pip >/dev/null
    else
        echo "tests/python.sh: $python lacks venv/ensurepip: install python3-venv and python3-pip" >&2
        exit 1
    fi
fi
"$python" -c 'import sys; assert sys.version_info >= (3, 9), "seedline needs Python >= 3.9"'

work=$(mktemp -d)
trap 'rm -rf "$work"' EXIT
"$python" -m venv "$work/venv"
py="$work/venv/bin/python"
"$py" -m pip install --quiet --upgrade pip
"$py" -m pip install --quiet numpy pytest

# The command the Python tests compare against, from the same checkout (a no-op after
# `cargo test`).
cargo build --locked --quiet --bin seedline
export SEEDLINE_BIN="$root/target/debug/seedline"

# maturin builds with the workspace's Cargo.lock (`locked = true`) into the shared target/.
if [ "${SEEDLINE_PY_PROFILE:-release}" != release ]; then
    export MATURIN_PEP517_ARGS="--profile ${SEEDLINE_PY_PROFILE}"
fi
export CARGO_TARGET_DIR="$root/target"
"$py" -m pip install --quiet "$root/python"

# Run from the tests folder so that `import seedline` finds the installed module.
cd "$root/python/tests"
"$py" -m pytest -q -p no:cacheprovider .
