#!/usr/bin/env bash
# From audit to retraining on the demo world (README "From audit to retraining"):
#   1. audit a separate synthesized set (not the bundled demo images) with the bundled model,
#   2. export its counterfactual pairs (`twinaudit pairs`),
#   3. retrain the demo model on its original data plus those pairs (same seed, same recipe),
#   4. re-audit the bundled demo with both models and `twinaudit compare` them,
#   5. compare clean accuracy on fresh held-out synthesized sets (never seen by either model).
# Needs .venv-train (tools/requirements-train.txt) for step 3; about 30 minutes on 2 cores, most
# of it training. Steps whose output exists are reused. Usage: tools/retrain_demo.sh [WORK_DIR]
set -euo pipefail
cd "$(dirname "${BASH_SOURCE[0]}")/.."
work="${1:-data/retrain}"
bin=target/release/twinaudit
tools/setup-runtime.sh
cargo build --release --quiet
mkdir -p "$work"
shortcuts=(--cloth-matches-bowl 1.0 --cloth-rate 0.9 --tags-match-apples 0.9)
before=models-cpu/stall-vqa.manifest.json
after_dir="$work/model"
after="$after_dir/stall-vqa-retrained.manifest.json"

step() { echo "== $*" >&2; }

step "1. audit a separate synthesized set (seed 31, the training distribution) with the bundled model"
[ -f "$work/audit-set/spec.json" ] ||
  "$bin" synth --scenes 600 --seed 31 "${shortcuts[@]}" --out "$work/audit-set"
[ -f "$work/audit-run/summary.json" ] ||
  "$bin" run --spec "$work/audit-set/spec.json" --model "$before" --out "$work/audit-run" --seed 31 --save-edits

step "2. export its counterfactual pairs"
[ -f "$work/pairs/pairs.json" ] ||
  "$bin" pairs "$work/audit-run" --out "$work/pairs" --seed 31 --validation-fraction 0.1

step "3. retrain on the original data plus the pairs"
[ -f "$after" ] ||
  .venv-train/bin/python tools/train_demo_model.py --twinaudit "$bin" --extra "$work/pairs" \
    --name stall-vqa-retrained --out "$after_dir"

step "4. re-audit the bundled demo with both models and compare"
for m in before after; do
  manifest=$([ "$m" = before ] && echo "$before" || echo "$after")
  [ -f "$work/demo-$m/summary.json" ] ||
    "$bin" run --spec edit-specs --model "$manifest" --out "$work/demo-$m" --seed 0 --save-edits > /dev/null
done
"$bin" compare "$work/demo-before" "$work/demo-after" | tee "$work/compare-demo.txt"
"$bin" compare "$work/demo-before" "$work/demo-after" --json > "$work/compare-demo.json"

step "5. clean accuracy on fresh held-out sets (seed 4243): training distribution and independent attributes"
[ -f "$work/heldout-shortcut/spec.json" ] ||
  "$bin" synth --scenes 600 --seed 4243 "${shortcuts[@]}" --out "$work/heldout-shortcut"
[ -f "$work/heldout-independent/spec.json" ] ||
  "$bin" synth --scenes 600 --seed 4243 --out "$work/heldout-independent"
for set in shortcut independent; do
  for m in before after; do
    manifest=$([ "$m" = before ] && echo "$before" || echo "$after")
    [ -f "$work/heldout-$set-$m/summary.json" ] ||
      "$bin" run --spec "$work/heldout-$set/spec.json" --model "$manifest" \
        --out "$work/heldout-$set-$m" --seed 0 > /dev/null
  done
  "$bin" compare "$work/heldout-$set-before" "$work/heldout-$set-after" | tee "$work/compare-heldout-$set.txt"
done
