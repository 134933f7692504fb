"""Regenerates the bundled demo: demo-images/ (scenes and masks) and edit-specs/stall.json.

Re-runnable and deterministic (the synthesizer is): `python3 tools/make_demo_bundle.py`.
Uses the release binary; build it first with `cargo build --release`.

The demo set is drawn with the synthesizer's default, independent attributes (no planted
correlation), so the cloth's colour usually differs from the bowl's: an audit of a model that
reads the cloth instead of the bowl then sees covering the cloth flip its colour answers.
"""
import json
import pathlib
import shutil
import subprocess
import sys
import tempfile

ROOT = pathlib.Path(__file__).resolve().parents[1]
SCENES, SEED = 60, 2026


def main() -> None:
    binary = ROOT / "target" / "release" / "twinaudit"
    with tempfile.TemporaryDirectory() as tmp:
        out = pathlib.Path(tmp) / "synth"
        subprocess.run([str(binary), "synth", "--scenes", str(SCENES), "--seed", str(SEED), "--out", str(out)],
                       check=True, stdout=sys.stderr)
        images = ROOT / "demo-images"
        if images.exists():
            shutil.rmtree(images)
        images.mkdir()
        shutil.copytree(out / "images", images / "images")
        shutil.copytree(out / "masks", images / "masks")
        shutil.copy(out / "scenes.jsonl", images / "scenes.jsonl")
        spec = json.loads((out / "spec.json").read_text())
        for case in spec["cases"]:
            case["image"] = "../demo-images/" + case["image"]
            for region in case["regions"]:
                if "mask" in region:
                    region["mask"] = "../demo-images/" + region["mask"]
        spec["description"] = (f"Bundled demo: {SCENES} fruit-stall scenes from `twinaudit synth --scenes {SCENES} "
                               f"--seed {SEED}` (independent attributes). " + spec.get("description", ""))
        specs = ROOT / "edit-specs"
        if specs.exists():
            shutil.rmtree(specs)
        specs.mkdir()
        (specs / "stall.json").write_text(json.dumps(spec, indent=1) + "\n")
    size = sum(p.stat().st_size for p in (ROOT / "demo-images").rglob("*") if p.is_file())
    print(f"demo-images: {size / 1e6:.2f} MB; edit-specs/stall.json: {len(spec['cases'])} cases")


if __name__ == "__main__":
    main()
