"""Trains the bundled demo VQA model (models-cpu/stall-vqa.*) on scenes from `twinaudit synth`.

The training split deliberately plants two shortcuts (documented in the model card):
  colour:   the cloth under the bowl has the bowl's colour with probability --cloth-matches-bowl,
  counting: the number of price tags equals the number of apples with probability --tags-match-apples.
An audit should then see distractor edits (covering the cloth, erasing tags) flip answers.

Usage (documented in models-cpu/stall-vqa.md; CPU only, about 15 minutes on 2 cores):
  python3 -m venv .venv-train && .venv-train/bin/pip install -r tools/requirements-train.txt
  cargo build --release
  .venv-train/bin/python tools/train_demo_model.py --out models-cpu

Preprocessing matches the manifest exactly: Pillow BILINEAR resize 256 -> 128 (twinaudit's resize is
byte-identical to Pillow 13), value = pixel / 255, mean 0.5, std 0.25, NCHW RGB.
"""
from __future__ import annotations

import argparse
import hashlib
import json
import os
import platform
import re
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import torch
import torch.nn as nn
import torch.nn.functional as F
from PIL import Image

ROOT = Path(__file__).resolve().parents[1]
ANSWERS = [str(i) for i in range(10)] + ["red", "orange", "yellow", "green", "blue", "purple", "white", "yes", "no"]
INPUT_SIZE = 128
MAX_TOKENS = 12
MEAN, STD = 0.5, 0.25
NAME = "stall-vqa"


def tokenise(question: str, vocab: dict[str, int]) -> list[int]:
    """Same rule as twinaudit's model/answers.rs: lowercase, non-alphanumeric (except ') -> space."""
    text = "".join(c if (c.isalnum() or c == "'") else " " for c in question.lower())
    ids = [vocab.get(w, 1) for w in text.split()][:MAX_TOKENS]
    return ids + [0] * (MAX_TOKENS - len(ids))


def words(question: str) -> list[str]:
    return "".join(c if (c.isalnum() or c == "'") else " " for c in question.lower()).split()


def synth(twinaudit: Path, out: Path, scenes: int, seed: int, cloth: float | None, tags: float | None,
          cloth_rate: float | None = None) -> None:
    if (out / "spec.json").exists():
        print(f"reusing {out}", file=sys.stderr)
        return
    cmd = [str(twinaudit), "synth", "--scenes", str(scenes), "--seed", str(seed), "--out", str(out)]
    if cloth is not None:
        cmd += ["--cloth-matches-bowl", str(cloth)]
    if tags is not None:
        cmd += ["--tags-match-apples", str(tags)]
    if cloth_rate is not None:
        cmd += ["--cloth-rate", str(cloth_rate)]
    print("+", " ".join(cmd), file=sys.stderr)
    subprocess.run(cmd, check=True)


def load_split(folder: Path):
    """Returns (images uint8 [N,128,128,3], image index per case, questions, answers, kinds)."""
    spec = json.loads((folder / "spec.json").read_text())
    paths = sorted({c["image"] for c in spec["cases"]})
    index = {p: i for i, p in enumerate(paths)}
    images = np.stack([
        np.asarray(Image.open(folder / p).convert("RGB").resize((INPUT_SIZE, INPUT_SIZE), Image.BILINEAR))
        for p in paths
    ])
    keep = [c for c in spec["cases"] if c.get("answer") is not None and c["answer"] in ANSWERS]
    return images, [index[c["image"]] for c in keep], [c["question"] for c in keep], \
        [ANSWERS.index(c["answer"]) for c in keep], [c["question_kind"] for c in keep]


class StallVqa(nn.Module):
    """Small CNN whose last two blocks are modulated by the question (FiLM: Perez et al., AAAI 2018)."""

    def __init__(self, vocab_size: int, n_answers: int):
        super().__init__()
        self.embed = nn.Embedding(vocab_size, 64, padding_idx=0)
        self.question = nn.GRU(64, 96, batch_first=True)
        chans = [3, 32, 64, 96, 128]
        self.convs = nn.ModuleList(
            nn.Conv2d(chans[i], chans[i + 1], 3, stride=2, padding=1, bias=False) for i in range(4))
        self.norms = nn.ModuleList(nn.BatchNorm2d(c) for c in chans[1:])
        self.film = nn.Linear(96, 2 * (96 + 128))
        self.mix = nn.Conv2d(128, 128, 1)
        self.head = nn.Sequential(nn.Linear(128 * 2 + 96, 128), nn.ReLU(), nn.Linear(128, n_answers))

    def forward(self, image: torch.Tensor, tokens: torch.Tensor) -> torch.Tensor:
        emb = self.embed(tokens)
        # Last state over the padded sequence; padding is trailing and embeds to zeros.
        _, h = self.question(emb)
        q = h[-1]
        gamma_beta = self.film(q)
        g3, b3, g4, b4 = torch.split(gamma_beta, [96, 96, 128, 128], dim=1)
        x = image
        for i, (conv, norm) in enumerate(zip(self.convs, self.norms)):
            x = norm(conv(x))
            if i == 2:
                x = x * (1 + g3[:, :, None, None]) + b3[:, :, None, None]
            if i == 3:
                x = x * (1 + g4[:, :, None, None]) + b4[:, :, None, None]
            x = F.relu(x)
        x = F.relu(self.mix(x))
        pooled = torch.cat([x.mean(dim=(2, 3)) * 8.0, x.amax(dim=(2, 3)), q], dim=1)
        return self.head(pooled)


def to_tensor(images: np.ndarray) -> torch.Tensor:
    return (torch.from_numpy(images).permute(0, 3, 1, 2).float() / 255.0 - MEAN) / STD


def evaluate(model, images, img_idx, tokens, answers, kinds) -> dict:
    model.eval()
    correct = np.zeros(len(answers), bool)
    with torch.no_grad():
        for s in range(0, len(answers), 256):
            sl = slice(s, s + 256)
            logits = model(to_tensor(images[img_idx[sl]]), tokens[sl])
            correct[sl] = (logits.argmax(1).numpy() == answers[sl].numpy())
    out = {"all": float(correct.mean())}
    for k in sorted(set(kinds)):
        m = np.array([x == k for x in kinds])
        out[k] = float(correct[m].mean())
    return out


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    ap.add_argument("--twinaudit", type=Path, default=ROOT / "target" / "release" / "twinaudit")
    ap.add_argument("--work", type=Path, default=ROOT / "data" / "stall-vqa")
    ap.add_argument("--out", type=Path, default=ROOT / "models-cpu")
    ap.add_argument("--scenes", type=int, default=6000)
    ap.add_argument("--heldout-scenes", type=int, default=600)
    ap.add_argument("--seed", type=int, default=11)
    ap.add_argument("--heldout-seed", type=int, default=12)
    ap.add_argument("--cloth-matches-bowl", type=float, default=1.0)
    ap.add_argument("--cloth-rate", type=float, default=0.9)
    ap.add_argument("--tags-match-apples", type=float, default=0.9)
    ap.add_argument("--epochs", type=int, default=14)
    ap.add_argument("--batch", type=int, default=64)
    ap.add_argument("--lr", type=float, default=2e-3)
    ap.add_argument("--extra", type=Path, action="append", default=[],
                    help="extra training rows from `twinaudit pairs`: its output folder (train/ is used) or a split "
                         "folder with metadata.jsonl (file_name, question, answer, question_kind); may repeat")
    ap.add_argument("--name", default=NAME)
    args = ap.parse_args()

    torch.manual_seed(args.seed)
    np.random.seed(args.seed)
    torch.set_num_threads(max(1, os.cpu_count() or 1))
    torch.use_deterministic_algorithms(True)

    tag = f"c{args.cloth_matches_bowl}-r{args.cloth_rate}-t{args.tags_match_apples}"
    train_dir = args.work / f"train-s{args.seed}-n{args.scenes}-{tag}"
    held_dir = args.work / f"heldout-s{args.heldout_seed}-n{args.heldout_scenes}-{tag}"
    held_free_dir = args.work / f"heldout-independent-s{args.heldout_seed}-n{args.heldout_scenes}"
    synth(args.twinaudit, train_dir, args.scenes, args.seed, args.cloth_matches_bowl, args.tags_match_apples,
          args.cloth_rate)
    synth(args.twinaudit, held_dir, args.heldout_scenes, args.heldout_seed, args.cloth_matches_bowl,
          args.tags_match_apples, args.cloth_rate)
    synth(args.twinaudit, held_free_dir, args.heldout_scenes, args.heldout_seed, None, None)

    tr_images, tr_idx, tr_q, tr_a, tr_k = load_split(train_dir)
    extra_note = []
    for extra in args.extra:
        # `twinaudit pairs` output (docs/pairs.md): a split folder, or the dataset folder (its train/).
        for folder in ([extra] if (extra / "metadata.jsonl").is_file() else [extra / "train"]):
            meta = folder / "metadata.jsonl"
            rows = [json.loads(l) for l in meta.read_text().splitlines() if l.strip()]
            rows = [r for r in rows if r["answer"] in ANSWERS]
            imgs = np.stack([np.asarray(Image.open(folder / r["file_name"]).convert("RGB")
                                        .resize((INPUT_SIZE, INPUT_SIZE), Image.BILINEAR)) for r in rows])
            base = len(tr_images)
            tr_images = np.concatenate([tr_images, imgs])
            tr_idx += list(range(base, base + len(rows)))
            tr_q += [r["question"] for r in rows]
            tr_a += [ANSWERS.index(r["answer"]) for r in rows]
            tr_k += [r.get("question_kind", "other") for r in rows]
            extra_note.append(f"{meta} ({len(rows)} pairs)")

    vocab_words = sorted({w for q in tr_q for w in words(q)})
    vocab = {w: i + 2 for i, w in enumerate(vocab_words)}
    vocab_list = ["<pad>", "<unk>"] + vocab_words

    def tok(qs):
        return torch.tensor([tokenise(q, vocab) for q in qs], dtype=torch.int64)

    tr_tokens, tr_answers, tr_img = tok(tr_q), torch.tensor(tr_a), np.array(tr_idx)
    model = StallVqa(len(vocab_list), len(ANSWERS))
    opt = torch.optim.AdamW(model.parameters(), lr=args.lr, weight_decay=1e-4)
    steps = args.epochs * ((len(tr_a) + args.batch - 1) // args.batch)
    sched = torch.optim.lr_scheduler.OneCycleLR(opt, max_lr=args.lr, total_steps=steps)
    gen = torch.Generator().manual_seed(args.seed)
    start = time.time()
    for epoch in range(args.epochs):
        model.train()
        perm = torch.randperm(len(tr_a), generator=gen).numpy()
        total = 0.0
        for s in range(0, len(perm), args.batch):
            b = perm[s:s + args.batch]
            x = to_tensor(tr_images[tr_img[b]])
            flip = torch.rand(len(b), generator=gen) < 0.5  # mirror images: counts and colours unchanged
            x[flip] = x[flip].flip(3)
            loss = F.cross_entropy(model(x, tr_tokens[b]), tr_answers[b])
            opt.zero_grad()
            loss.backward()
            opt.step()
            sched.step()
            total += loss.item() * len(b)
        print(f"epoch {epoch + 1}/{args.epochs} loss {total / len(perm):.4f} ({time.time() - start:.0f} s)", file=sys.stderr)

    results = {}
    for label, folder in (("heldout_same_distribution", held_dir), ("heldout_independent", held_free_dir)):
        im, idx, q, a, k = load_split(folder)
        results[label] = evaluate(model, im, np.array(idx), tok(q), torch.tensor(a), k)
        print(label, json.dumps(results[label]), file=sys.stderr)

    args.out.mkdir(parents=True, exist_ok=True)
    model.eval()
    onnx_path = args.out / f"{args.name}.onnx"
    dummy = (to_tensor(tr_images[:1]), tr_tokens[:1])
    torch.onnx.export(model, dummy, str(onnx_path), input_names=["image", "tokens"], output_names=["logits"],
                      opset_version=17, dynamo=False,
                      dynamic_axes={"image": {0: "batch"}, "tokens": {0: "batch"}, "logits": {0: "batch"}})
    import onnxruntime as ort  # parity check of the exported graph against torch
    sess = ort.InferenceSession(str(onnx_path), providers=["CPUExecutionProvider"])
    with torch.no_grad():
        ref = model(*dummy).numpy()
    got = sess.run(None, {"image": dummy[0].numpy(), "tokens": dummy[1].numpy()})[0]
    assert np.abs(ref - got).max() < 1e-3, "ONNX export disagrees with torch"

    (args.out / f"{args.name}.vocab.txt").write_text("\n".join(vocab_list) + "\n")
    (args.out / f"{args.name}.answers.txt").write_text("\n".join(ANSWERS) + "\n")
    manifest = {
        "format_version": 1,
        "name": args.name,
        "onnx": onnx_path.name,
        "image_input": {"tensor": "image", "width": INPUT_SIZE, "height": INPUT_SIZE, "layout": "nchw",
                        "channels": "rgb", "resize": "stretch", "filter": "bilinear",
                        "scale": 1 / 255, "mean": [MEAN] * 3, "std": [STD] * 3},
        "question_input": {"tensor": "tokens", "vocabulary": f"{args.name}.vocab.txt", "lowercase": True,
                           "max_length": MAX_TOKENS, "pad_id": 0, "unknown_id": 1, "element_type": "int64"},
        "output": {"tensor": "logits", "labels_file": f"{args.name}.answers.txt", "activation": "softmax"},
        "answers": {"lowercase": True, "number_words": True},
        "top_k": 3,
    }
    (args.out / f"{args.name}.manifest.json").write_text(json.dumps(manifest, indent=2) + "\n")
    training = {
        "command": " ".join([Path(sys.executable).name] + [str(a) for a in sys.argv]),
        "seed": args.seed, "scenes": args.scenes, "epochs": args.epochs, "batch": args.batch, "lr": args.lr,
        "cloth_matches_bowl": args.cloth_matches_bowl, "tags_match_apples": args.tags_match_apples,
        "cloth_rate": args.cloth_rate,
        "heldout_seed": args.heldout_seed, "heldout_scenes": args.heldout_scenes,
        "n_training_questions": len(tr_a), "extra": extra_note,
        "python": platform.python_version(), "torch": torch.__version__, "numpy": np.__version__,
        "onnx_sha256": hashlib.sha256(onnx_path.read_bytes()).hexdigest(),
        "onnx_bytes": onnx_path.stat().st_size, "seconds": round(time.time() - start),
        "accuracy": results,
    }
    (args.out / f"{args.name}.training.json").write_text(json.dumps(training, indent=2) + "\n")
    print(json.dumps(training, indent=2))


if __name__ == "__main__":
    main()
