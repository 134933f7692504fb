#!/usr/bin/env bash
# Install Debian's chromium for the report's browser test (tests/report_browser.rs) when missing.
# Idempotent and non-interactive; needs root (CI runs as root). Never fails the caller: without a
# browser the test prints why it skipped, so a machine without apt or root still runs every other test.
set -uo pipefail
browser="${CHROMIUM:-/usr/bin/chromium}"
if [ -x "$browser" ]; then
  exit 0
fi
if [ "$(id -u)" != "0" ] || ! command -v apt-get >/dev/null 2>&1; then
  echo "twinaudit: $browser is missing and this is not root with apt-get; the report browser test will be skipped" >&2
  exit 0
fi
echo "twinaudit: installing Debian's chromium for the report browser test (one time)" >&2
export DEBIAN_FRONTEND=noninteractive
if ! apt-get update -qq >&2 || ! apt-get install -y -qq --no-install-recommends chromium >&2; then
  echo "twinaudit: apt-get could not install chromium; the report browser test will be skipped" >&2
fi
exit 0
