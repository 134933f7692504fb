#!/usr/bin/env bash
# Quick start, part 2: fetch ONNX Runtime if needed and run every test. Optional helpers for two
# tests are set up first when possible (Hugging Face `datasets` for the pairs loading test, Debian's
# chromium for the report's browser test); a test
# whose helper is missing prints SKIPPED with the reason instead of failing.
set -euo pipefail
cd "$(dirname "${BASH_SOURCE[0]}")/.."
tools/setup-runtime.sh
tools/install-browser.sh  # chromium for tests/report_browser.rs; never fails, the test skips without it
tools/setup-datasets-venv.sh ||
  echo "tools/test.sh: no .venv-datasets; tests/pairs_datasets.rs will print SKIPPED" >&2
cargo test --all-targets "$@"
