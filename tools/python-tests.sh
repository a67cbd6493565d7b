#!/usr/bin/env bash
# Build the Python module into a fresh virtual environment, install it as a user would, and run its
# tests (pytest, each entry point against the command line) and the plotting example. CI runs this
# after `cargo test --profile ci`. Needs python3 with venv, a Rust toolchain, and the package registry
# (maturin, numpy, pytest, matplotlib).
set -euo pipefail
root=$(cd "$(dirname "$0")/.." && pwd)
work=$(mktemp -d)
trap 'rm -rf "$work"' EXIT
python3 -m venv "$work/venv"
py="$work/venv/bin/python"
"$py" -m pip install --quiet --upgrade pip
"$py" -m pip install --quiet "maturin>=1.5,<2" numpy pytest matplotlib
# The command the tests compare with (already built by `cargo test --profile ci`; cheap otherwise), and
# the wheel in the same profile: it shares the workspace's target folder and most of its compiled crates.
cargo build --profile ci --quiet --manifest-path "$root/Cargo.toml"
"$work/venv/bin/maturin" build --profile ci --quiet --manifest-path "$root/python/Cargo.toml" --interpreter "$py" --out "$work/wheels"
"$py" -m pip install --quiet "$work"/wheels/kicktrain-*.whl
cd "$work"
KICKTRAIN_BIN="$root/target/ci/kicktrain" "$py" -m pytest -q -p no:cacheprovider "$root/python/tests"
"$py" "$root/examples/python_trace.py" "$work/trace.png"
