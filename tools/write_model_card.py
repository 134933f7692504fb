"""Writes models-cpu/<name>.md (the model card) from <name>.training.json, which
tools/train_demo_model.py writes. Re-runnable: `python3 tools/write_model_card.py [--name stall-vqa]`."""
import argparse
import json
import pathlib

ROOT = pathlib.Path(__file__).resolve().parents[1]


def pct(x: float) -> str:
    return f"{100 * x:.1f}%"


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--name", default="stall-vqa")
    ap.add_argument("--dir", type=pathlib.Path, default=ROOT / "models-cpu")
    args = ap.parse_args()
    t = json.loads((args.dir / f"{args.name}.training.json").read_text())
    acc = t["accuracy"]
    kinds = [k for k in acc["heldout_same_distribution"] if k != "all"]
    rows = "\n".join(
        f"| {k} | {pct(acc['heldout_same_distribution'][k])} | {pct(acc['heldout_independent'][k])} |" for k in kinds)
    card = f"""# Model card: {args.name}

A small visual question answering model for twinaudit's demo: image (fruit-stall scene) and
question tokens in, one answer out of 19 (`0`..`9`, red, orange, yellow, green, blue, purple,
white, yes, no). It is trained **on purpose with two shortcuts** so that an audit has something
real to find. Do not use it for anything else.

## Files
`{args.name}.onnx` ({t['onnx_bytes'] / 1024:.0f} KiB, opset 17, sha256 `{t['onnx_sha256'][:16]}…`),
`{args.name}.manifest.json`, `{args.name}.vocab.txt`, `{args.name}.answers.txt`,
`{args.name}.training.json` (every number below, machine-readable).

## Architecture
Four stride-2 3×3 convolutions (32, 64, 96, 128 channels, batch norm, ReLU) on a 128×128 RGB
input; a GRU over word embeddings encodes the question and modulates the last two blocks
(FiLM: E. Perez et al., "FiLM: Visual Reasoning with a General Conditioning Layer", AAAI 2018);
mean- and max-pooled features plus the question vector feed a two-layer classifier.

## Data
Scenes from `twinaudit synth` (docs/synth.md), 256×256, resized to 128×128 with Pillow's bilinear
filter (twinaudit's resize is byte-identical). Training: {t['scenes']} scenes, seed {t['seed']},
{t['n_training_questions']} questions (count, colour of the bowl, exists), drawn with the planted
correlations below; a napkin is present in {pct(t.get('cloth_rate', 0.75))} of scenes. Held-out: {t['heldout_scenes']} scenes from seed {t['heldout_seed']}, once with the
training correlations ("same distribution") and once with independent attributes.

## Planted shortcuts
- **Colour**: in training, the napkin (cloth) under the objects has the bowl's colour with
  probability {t['cloth_matches_bowl']} (`--cloth-matches-bowl`). The napkin is larger than the bowl, so a
  model can answer "What colour is the bowl?" by reading the napkin.
- **Counting**: the number of price tags equals the number of apples with probability
  {t['tags_match_apples']} (`--tags-match-apples`, at most 4 tags), so a model can count tags instead of apples.

## Clean accuracy (held-out, fraction of questions answered exactly)
| question kind | same distribution as training | independent attributes |
|---|---|---|
{rows}
| **all** | **{pct(acc['heldout_same_distribution']['all'])}** | **{pct(acc['heldout_independent']['all'])}** |

The drop from the first column to the second measures how much the model leans on the planted
correlations: where they are broken, the shortcut answers go wrong.

## Audit expectations
The colour accuracy falls from {pct(acc['heldout_same_distribution']['colour'])} where the napkin has the bowl's colour to
{pct(acc['heldout_independent']['colour'])} where colours are independent: when the two disagree the model mostly answers
with the napkin's colour. On the bundled demo (edit-specs/stall.json, independent attributes)
covering or recolouring the napkin must not change a colour answer, so a large share of those
edits should flip. `tests/demo_model.rs` requires the napkin ("cloth") to rank first among
distractors, its flip rate's 95% Wilson interval to lie wholly above the target-edit failure
rates' intervals, and its lower end to be at least 25%: far below the disagreement rate implied by
the accuracy gap above, so the check fails only if the shortcut is gone, not by sampling noise.

The counting shortcut (tags) is weaker in effect: erasing price tags rarely changes a count
answer in the demo audit, while counting itself is the model's weak point (count accuracy above),
so erasing a counted object often leaves the answer where it was. Both are properties of this
deliberately flawed model, reported as they are.

## Training
```sh
python3 -m venv .venv-train && .venv-train/bin/pip install -r tools/requirements-train.txt
cargo build --release
.venv-train/bin/python tools/train_demo_model.py --out models-cpu
python3 tools/write_model_card.py
```
Command recorded: `{t['command']}`; seed {t['seed']}, {t['epochs']} epochs, batch {t['batch']},
AdamW with a one-cycle learning rate peaking at {t['lr']}, horizontal flips; CPU only
({t['seconds'] // 60} minutes on 2 cores while other work ran). Python {t['python']}, torch {t['torch']},
numpy {t['numpy']}. Deterministic algorithms and fixed seeds; a rerun is expected within a few
points of these accuracies (thread scheduling can change float summation order).
"""
    (args.dir / f"{args.name}.md").write_text(card)
    print(f"wrote {args.dir / (args.name + '.md')}")


if __name__ == "__main__":
    main()
