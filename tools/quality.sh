#!/usr/bin/env bash
# Fill quality and speed against OpenCV, in one run: build, run our harness, run OpenCV on the same
# inputs, write docs/quality.md. Needs .venv with tools/requirements-fixtures.txt installed.
# Usage: tools/quality.sh [DIR]   (default target/quality; inputs and outputs land there)
set -euo pipefail
cd "$(dirname "${BASH_SOURCE[0]}")/.."
dir="${1:-target/quality}"
cargo build --release --example quality
cargo run --release --example quality -- --out "$dir"
.venv/bin/python tools/compare_opencv.py "$dir" --doc docs/quality.md
