#!/usr/bin/env bash
# Fetch the pinned ONNX Runtime shared library from its PyPI wheel into .ort/ (git-ignored).
# Idempotent: does nothing when the library is already there. The only network use of the project.
set -euo pipefail
ORT_VERSION="${TWINAUDIT_ORT_VERSION:-1.32.0}"
root="$(cd "$(dirname "${BASH_SOURCE[0]}")/.." && pwd)"
dest="$root/.ort"
lib="$dest/libonnxruntime.so.$ORT_VERSION"
if [ -f "$lib" ]; then
  exit 0
fi
python="${PYTHON:-python3}"
tmp="$(mktemp -d)"
trap 'rm -rf "$tmp"' EXIT
echo "twinaudit: fetching onnxruntime==$ORT_VERSION wheel from PyPI (one time, ~15 MB)" >&2
"$python" -m pip download --quiet --no-deps --only-binary=:all: "onnxruntime==$ORT_VERSION" -d "$tmp" >&2
wheel="$(ls "$tmp"/onnxruntime-"$ORT_VERSION"-*.whl | head -n 1)"
mkdir -p "$dest"
"$python" - "$wheel" "$dest" "$ORT_VERSION" <<'PY'
import sys, zipfile, pathlib
wheel, dest, version = sys.argv[1], pathlib.Path(sys.argv[2]), sys.argv[3]
name = f"onnxruntime/capi/libonnxruntime.so.{version}"
with zipfile.ZipFile(wheel) as z:
    data = z.read(name)
out = dest / f"libonnxruntime.so.{version}"
tmp = out.with_suffix(".part")
tmp.write_bytes(data)
tmp.rename(out)
PY
echo "twinaudit: ONNX Runtime $ORT_VERSION installed at $lib" >&2
