#!/usr/bin/env bash
# Optional: a venv with Hugging Face `datasets` (pinned in tools/requirements-datasets.txt) in
# .venv-datasets/ (git-ignored), for the loading test of `twinaudit pairs` output
# (tests/pairs_datasets.rs runs tools/check_pairs_dataset.py with it, and skips without it).
# Needs PyPI once; afterwards does nothing and needs no network. Exit 1, with the venv removed,
# when the install fails.
set -euo pipefail
root="$(cd "$(dirname "${BASH_SOURCE[0]}")/.." && pwd)"
venv="$root/.venv-datasets"
req="$root/tools/requirements-datasets.txt"
stamp="$venv/requirements.sha256"
want="$(sha256sum "$req" | cut -d' ' -f1)"
if [ -x "$venv/bin/python" ] && [ -f "$stamp" ] && [ "$(cat "$stamp")" = "$want" ]; then
  exit 0
fi
python="${PYTHON:-python3}"
rm -rf "$venv"
echo "twinaudit: installing $req into $venv (one time, about a minute)" >&2
if ! { "$python" -m venv "$venv" && "$venv/bin/pip" install --quiet --disable-pip-version-check -r "$req"; } >&2; then
  rm -rf "$venv"
  echo "twinaudit: could not set up $venv (needs python3-venv and PyPI); the datasets loading test will be skipped" >&2
  exit 1
fi
echo "$want" > "$stamp"
