#!/usr/bin/env bash
# Quick start, part 2: fetch ONNX Runtime if needed and run every test (no Python needed).
set -euo pipefail
cd "$(dirname "${BASH_SOURCE[0]}")/.."
tools/setup-runtime.sh
cargo test --all-targets "$@"
