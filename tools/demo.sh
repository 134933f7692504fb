#!/usr/bin/env bash
# Quick start, part 1: fetch ONNX Runtime if needed, build, and run the bundled audit.
set -euo pipefail
cd "$(dirname "${BASH_SOURCE[0]}")/.."
tools/setup-runtime.sh
cargo build --release --quiet
exec target/release/twinaudit demo "$@"
