#!/usr/bin/env python3
"""OpenCV on the quality harness's inputs, scored and timed like ours; writes docs/quality.md.

Usage: .venv/bin/python tools/compare_opencv.py DIR [--doc docs/quality.md]
where DIR was written by `cargo run --release --example quality -- --out DIR` (tools/quality.sh
runs both in one go).

Reads DIR/ours.json (the case list and our numbers) and DIR/inputs/NAME.{image,truth,mask,source}.png.
For each inpainting case runs, in one thread (cv2.setNumThreads(1)):
  cv2.inpaint(img_bgr, mask, 5, cv2.INPAINT_TELEA)   (opencv-python-headless, version printed)
  cv2.inpaint(img_bgr, mask, 5, cv2.INPAINT_NS)
radius 5 = our `erase` default radius_px; for each clone case
  cv2.seamlessClone(src_bgr, dst_bgr, mask, center, cv2.NORMAL_CLONE)
Timing: wall time (time.perf_counter) of one call, median of 5 runs.
Writes DIR/opencv/NAME.METHOD.png, DIR/opencv.json, and the merged table to docs/quality.md.

Metrics, the same definitions as examples/quality.rs, implemented here in numpy:
  PSNR = 10*log10(255^2 / MSE), MSE over hole pixels x RGB channels.
  SSIM (Z. Wang, A. C. Bovik, H. R. Sheikh, E. P. Simoncelli, IEEE TIP 13(4), 2004): Gaussian
  window sigma 1.5 truncated to 11x11 and normalised, K1 0.01, K2 0.03, L 255, population
  variances; per RGB channel on the crop to the hole's bounding box, mean over the window
  centres whose whole window lies in the box, then mean over channels.
Cross-checks (printed and recorded in opencv.json and the doc): our numpy SSIM against
scikit-image's structural_similarity(gaussian_weights=True, sigma=1.5, use_sample_covariance=False,
data_range=255, channel_axis=2) on the same crops, when scikit-image is installed; and our
numpy PSNR/SSIM recomputed on our Rust outputs against the numbers in ours.json.
"""

import argparse
import datetime
import json
import os
import platform
import statistics
import subprocess
import sys
import time

import cv2
import numpy as np
from PIL import Image

N_RUNS = 5
RADIUS = 5


def load_rgb(path):
    return np.asarray(Image.open(path).convert("RGB"))


def load_mask(path):
    return np.asarray(Image.open(path).convert("L")) > 127


def psnr_in_hole(truth, fill, hole):
    d = truth[hole].astype(np.float64) - fill[hole].astype(np.float64)
    mse = float(np.mean(d * d))
    return float("inf") if mse == 0.0 else 10.0 * np.log10(255.0 ** 2 / mse)


def gaussian_taps():
    d = np.arange(11, dtype=np.float64) - 5.0
    t = np.exp(-d * d / (2.0 * 1.5 * 1.5))
    return t / t.sum()


def filter_valid(plane, taps):
    """Separable 'valid' correlation with the 11-tap window: (h-10) x (w-10)."""
    h, w = plane.shape
    rows = sum(taps[k] * plane[:, k:w - 10 + k] for k in range(11))
    return sum(taps[k] * rows[k:h - 10 + k, :] for k in range(11))


def ssim_in_box(truth, fill, bbox):
    x0, y0, x1, y1 = bbox
    taps = gaussian_taps()
    c1, c2 = (0.01 * 255) ** 2, (0.03 * 255) ** 2
    vals = []
    for c in range(3):
        a = truth[y0:y1, x0:x1, c].astype(np.float64)
        b = fill[y0:y1, x0:x1, c].astype(np.float64)
        ma, mb = filter_valid(a, taps), filter_valid(b, taps)
        va = filter_valid(a * a, taps) - ma * ma
        vb = filter_valid(b * b, taps) - mb * mb
        cov = filter_valid(a * b, taps) - ma * mb
        s = ((2 * ma * mb + c1) * (2 * cov + c2)) / ((ma * ma + mb * mb + c1) * (va + vb + c2))
        vals.append(float(s.mean()))
    return float(np.mean(vals))


def ssim_skimage(truth, fill, bbox):
    try:
        from skimage.metrics import structural_similarity
    except ImportError:
        return None
    x0, y0, x1, y1 = bbox
    return float(structural_similarity(
        truth[y0:y1, x0:x1], fill[y0:y1, x0:x1], gaussian_weights=True, sigma=1.5,
        use_sample_covariance=False, data_range=255, channel_axis=2))


def timed(fn):
    """(median ms, min ms), last output."""
    times, out = [], None
    for _ in range(N_RUNS):
        t0 = time.perf_counter()
        out = fn()
        times.append((time.perf_counter() - t0) * 1000.0)
    return (statistics.median(times), min(times)), out


def machine():
    model = ""
    try:
        for line in subprocess.run(["lscpu"], capture_output=True, text=True).stdout.splitlines():
            if line.startswith("Model name:"):
                model = line.split(":", 1)[1].strip()
    except OSError:
        pass
    return {"nproc": os.cpu_count(), "cpu_model": model or platform.processor(),
            "os": platform.platform()}


def versions():
    from importlib import metadata

    def dist(name):
        try:
            return metadata.version(name)
        except metadata.PackageNotFoundError:
            return None

    v = {"python": platform.python_version(),
         "opencv-python-headless": dist("opencv-python-headless") or cv2.__version__,
         "numpy": dist("numpy"), "pillow": dist("pillow"), "scikit-image": dist("scikit-image")}
    try:
        v["rustc"] = subprocess.run(["rustc", "--version"], capture_output=True,
                                    text=True).stdout.strip()
    except OSError:
        v["rustc"] = None
    return v


def source_state():
    """HEAD and the files under src/ that differ from it (timings depend on the working tree)."""
    root = os.path.join(os.path.dirname(os.path.abspath(__file__)), "..")
    try:
        head = subprocess.run(["git", "rev-parse", "--short", "HEAD"], cwd=root,
                              capture_output=True, text=True).stdout.strip()
        dirty = subprocess.run(["git", "status", "--porcelain", "src", "examples"], cwd=root,
                               capture_output=True, text=True).stdout.split("\n")
        return {"head": head, "changed": [l[3:] for l in dirty if l.strip()]}
    except OSError:
        return {"head": None, "changed": []}


def means(ours, results):
    """Mean PSNR and SSIM per method over the procedural and the table inputs."""
    by_name = {r["name"]: r for r in results}
    acc = {}
    for case in ours["cases"]:
        if case["kind"] != "inpaint":
            continue
        group = "table" if case["texture"].startswith("table_") else "procedural"
        ms = {"ours telea": case["methods"]["telea"], "ours exemplar": case["methods"]["exemplar"],
              "OpenCV TELEA": by_name[case["name"]]["methods"]["opencv_telea"],
              "OpenCV NS": by_name[case["name"]]["methods"]["opencv_ns"]}
        for label, m in ms.items():
            acc.setdefault((group, label), []).append((m["psnr_db"], m["ssim"]))
    lines = ["| inputs | method | mean PSNR dB | mean SSIM |", "|---|---|---:|---:|"]
    for (group, label), v in acc.items():
        lines.append(f"| {group} ({len(v)}) | {label} | {np.mean([p for p, _ in v]):.2f} | "
                     f"{np.mean([q for _, q in v]):.4f} |")
    return lines


def fmt(x, spec):
    return "–" if x is None else format(x, spec)


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("dir")
    ap.add_argument("--doc", default=os.path.join(os.path.dirname(__file__), "..", "docs",
                                                  "quality.md"))
    args = ap.parse_args()
    cv2.setNumThreads(1)
    inputs = os.path.join(args.dir, "inputs")
    out_dir = os.path.join(args.dir, "opencv")
    os.makedirs(out_dir, exist_ok=True)
    with open(os.path.join(args.dir, "ours.json")) as f:
        ours = json.load(f)

    results, checks = [], []
    for case in ours["cases"]:
        name = case["name"]
        mask = load_mask(os.path.join(inputs, f"{name}.mask.png"))
        mask_u8 = mask.astype(np.uint8) * 255
        image = load_rgb(os.path.join(inputs, f"{name}.image.png"))
        bgr = np.ascontiguousarray(image[:, :, ::-1])
        row = {"name": name, "kind": case["kind"], "methods": {}}
        if case["kind"] == "inpaint":
            truth = load_rgb(os.path.join(inputs, f"{name}.truth.png"))
            bbox = case["hole_bbox"]
            for method, flag in [("opencv_telea", cv2.INPAINT_TELEA),
                                 ("opencv_ns", cv2.INPAINT_NS)]:
                ms, out = timed(lambda: cv2.inpaint(bgr, mask_u8, RADIUS, flag))
                rgb = np.ascontiguousarray(out[:, :, ::-1])
                Image.fromarray(rgb).save(os.path.join(out_dir, f"{name}.{method}.png"))
                ssim = ssim_in_box(truth, rgb, bbox)
                sk = ssim_skimage(truth, rgb, bbox)
                if sk is not None:
                    checks.append(("skimage vs numpy SSIM", abs(sk - ssim)))
                row["methods"][method] = {"psnr_db": psnr_in_hole(truth, rgb, mask),
                                          "ssim": ssim, "ssim_skimage": sk, "time_ms": ms[0],
                                          "min_time_ms": ms[1]}
            # Our outputs rescored here: the Rust metrics must agree with these.
            for method, m in case["methods"].items():
                rgb = load_rgb(os.path.join(args.dir, "ours", f"{name}.{method}.png"))
                checks.append(("Rust vs numpy PSNR (dB)",
                               abs(psnr_in_hole(truth, rgb, mask) - m["psnr_db"])))
                checks.append(("Rust vs numpy SSIM", abs(ssim_in_box(truth, rgb, bbox) - m["ssim"])))
                sk = ssim_skimage(truth, rgb, bbox)
                if sk is not None:
                    checks.append(("skimage vs Rust SSIM", abs(sk - m["ssim"])))
            # Our Telea is meant to match OpenCV's byte for byte.
            ours_telea = load_rgb(os.path.join(args.dir, "ours", f"{name}.telea.png"))
            cv_telea = load_rgb(os.path.join(out_dir, f"{name}.opencv_telea.png"))
            diff = np.abs(ours_telea.astype(int) - cv_telea.astype(int))
            row["telea_max_abs_diff_vs_opencv"] = int(diff.max())
        else:
            src = load_rgb(os.path.join(inputs, f"{name}.source.png"))
            src_bgr = np.ascontiguousarray(src[:, :, ::-1])
            center = tuple(int(v) for v in case["center"])
            ms, out = timed(lambda: cv2.seamlessClone(src_bgr, bgr, mask_u8, center,
                                                      cv2.NORMAL_CLONE))
            rgb = np.ascontiguousarray(out[:, :, ::-1])
            Image.fromarray(rgb).save(os.path.join(out_dir, f"{name}.opencv_seamless.png"))
            ours_out = load_rgb(os.path.join(args.dir, "ours", f"{name}.poisson.png"))
            # Agreement inside the mask eroded by 3 px (OpenCV erodes its mask before solving).
            inner = cv2.erode(mask_u8, np.ones((3, 3), np.uint8), iterations=3) > 0
            mad = float(np.mean(np.abs(ours_out[inner].astype(float) - rgb[inner].astype(float))))
            row["methods"]["opencv_seamless"] = {"time_ms": ms[0], "min_time_ms": ms[1]}
            row["poisson_mean_abs_diff_vs_opencv_eroded_mask"] = mad
        results.append(row)

    summary = {}
    for label, v in checks:
        summary[label] = max(summary.get(label, 0.0), v)
    report = {
        "generator": "tools/compare_opencv.py",
        "date_utc": datetime.datetime.now(datetime.timezone.utc).strftime("%Y-%m-%d %H:%M UTC"),
        "machine": machine(), "versions": versions(), "n_runs": N_RUNS, "threads": 1,
        "inpaint_radius": RADIUS,
        "loadavg_at_end": " ".join(f"{x:.2f}" for x in os.getloadavg()),
        "source": source_state(), "max_abs_metric_differences": summary, "cases": results,
    }
    with open(os.path.join(args.dir, "opencv.json"), "w") as f:
        json.dump(report, f, indent=2)
        f.write("\n")

    lines = table(ours, results)
    print("\n".join(lines))
    for label, v in summary.items():
        print(f"max |{label}| = {v:.2e}")
    write_doc(args.doc, ours, report, lines)
    print(f"wrote {os.path.join(args.dir, 'opencv.json')} and {os.path.normpath(args.doc)}")


def table(ours, results):
    by_name = {r["name"]: r for r in results}
    lines = ["| input | hole % | method | PSNR dB | SSIM | time ms | ours / OpenCV time |",
             "|---|---:|---|---:|---:|---:|---:|"]
    for case in ours["cases"]:
        name, cv = case["name"], by_name[case["name"]]
        hole = 100.0 * case["hole_fraction"]
        if case["kind"] == "inpaint":
            cv_telea_ms = cv["methods"]["opencv_telea"]["time_ms"]
            rows = [("ours telea", case["methods"]["telea"], case["methods"]["telea"]["time_ms"] / cv_telea_ms),
                    ("ours exemplar", case["methods"]["exemplar"], None),
                    ("OpenCV TELEA", cv["methods"]["opencv_telea"], None),
                    ("OpenCV NS", cv["methods"]["opencv_ns"], None)]
        else:
            cv_ms = cv["methods"]["opencv_seamless"]["time_ms"]
            rows = [("ours poisson", case["methods"]["poisson"],
                     case["methods"]["poisson"]["time_ms"] / cv_ms),
                    ("OpenCV seamlessClone", cv["methods"]["opencv_seamless"], None)]
        for label, m, ratio in rows:
            lines.append(f"| {name} | {hole:.1f} | {label} | {fmt(m.get('psnr_db'), '.2f')} | "
                         f"{fmt(m.get('ssim'), '.4f')} | {m['time_ms']:.1f} | {fmt(ratio, '.2f')} |")
    return lines


def write_doc(path, ours, report, lines):
    m, v = report["machine"], report["versions"]
    ratios_telea, ratios_clone, telea_diffs, clone_mads = [], [], [], []
    min_telea, min_clone = [], []
    for case, r in zip(ours["cases"], report["cases"]):
        if case["kind"] == "inpaint":
            ours_t, cv_t = case["methods"]["telea"], r["methods"]["opencv_telea"]
            ratios_telea.append(ours_t["time_ms"] / cv_t["time_ms"])
            min_telea.append(ours_t["min_time_ms"] / cv_t["min_time_ms"])
            telea_diffs.append(r["telea_max_abs_diff_vs_opencv"])
        else:
            ours_p, cv_p = case["methods"]["poisson"], r["methods"]["opencv_seamless"]
            ratios_clone.append((case["name"], ours_p["time_ms"] / cv_p["time_ms"]))
            min_clone.append((case["name"], ours_p["min_time_ms"] / cv_p["min_time_ms"]))
            clone_mads.append((case["name"], r["poisson_mean_abs_diff_vs_opencv_eroded_mask"]))
    checks = report["max_abs_metric_differences"]
    doc = f"""# Fill quality and speed against OpenCV

Generated by `tools/quality.sh` ({report['date_utc']}); do not edit by hand, re-run instead.

## How to reproduce
```sh
tools/quality.sh [DIR]     # default DIR: target/quality
# which runs:
cargo build --release --example quality
cargo run --release --example quality -- --out DIR      # inputs, our outputs, DIR/ours.json
.venv/bin/python tools/compare_opencv.py DIR            # OpenCV, DIR/opencv.json, this file
```

## Setup
- Source: git HEAD {report['source']['head']}; files under src/ and examples/ differing from it
  when this ran: {', '.join(report['source']['changed']) or 'none'}.
- Machine: {m['nproc']} cores (`nproc`), {m['cpu_model']} (`lscpu` model name), {m['os']}.
- Versions: {v['rustc']}; Python {v['python']}; opencv-python-headless {v['opencv-python-headless']};
  numpy {v['numpy']}; Pillow {v['pillow']}; scikit-image {v['scikit-image']} (SSIM cross-check only).
- Inputs (examples/quality.rs, fixed seed): 512×512; four procedural textures (stripes, checker,
  weave, wood grain, each with uniform noise) and three table surfaces from our scene synthesizer
  (`synth::texture::table_texture`: wood, woven, stone, before lighting). Holes are 5:4
  rectangles of 5% and 15% of the image, slightly off centre, painted black in the input so no
  method can read the truth. Clone cases: a shaded ball (radius 56 px and 230 px) with a margin of
  grey cloth, pasted at the image centre onto a synthesized woven table; the mask is the ball's disc
  grown by the margin.
- Methods (each given the exact hole; `erase`'s `dilate_px` is not applied): ours `inpaint_telea`
  (radius 5, `erase`'s default), `inpaint_exemplar` (defaults:
  9 px patches), `poisson_clone` (defaults, offset 0); OpenCV `cv2.inpaint(img, mask, 5,
  cv2.INPAINT_TELEA)`, `cv2.inpaint(img, mask, 5, cv2.INPAINT_NS)`,
  `cv2.seamlessClone(src, dst, mask, center, cv2.NORMAL_CLONE)` with `center` the disc's centre
  (same placement as ours).
- Timing: wall time of one call, median of {report['n_runs']} runs, one thread (our fills are
  single-threaded; OpenCV with `cv2.setNumThreads(1)`). OpenCV is called from Python; the call
  overhead is microseconds. Load average (1, 5, 15 min) when each step ended: ours
  {ours.get('loadavg_at_end')}, OpenCV {report['loadavg_at_end']}; other work on the machine
  inflates wall times, so compare ratios from one quiet run.
- PSNR = 10·log10(255² / MSE), MSE over the hole's pixels and the three RGB channels (standard
  definition).
- SSIM: Z. Wang, A. C. Bovik, H. R. Sheikh, E. P. Simoncelli, "Image quality assessment: from
  error visibility to structural similarity", IEEE TIP 13(4), 2004; Gaussian window σ = 1.5
  (11×11, normalised), K1 = 0.01, K2 = 0.03, L = 255, population variances; computed **per RGB
  channel** on truth and fill cropped to the hole's bounding box, averaged over the window centres
  whose whole window lies in the box (for these rectangular holes: windows wholly inside the hole),
  then over the three channels. Implemented in Rust (examples/quality.rs) and in numpy
  (tools/compare_opencv.py).
- Cross-checks (largest absolute difference over all cases):
{chr(10).join(f'  - {k}: {val:.1e}' for k, val in checks.items())}
  (skimage: `structural_similarity(gaussian_weights=True, sigma=1.5, use_sample_covariance=False,
  data_range=255, channel_axis=2)` on the same crops.)
- Our Telea vs OpenCV TELEA, largest per-pixel difference over all inpainting cases:
  {max(telea_diffs)} levels.
- Our Poisson vs OpenCV seamlessClone, mean absolute difference inside the mask eroded by 3×3
  three times (OpenCV erodes its mask before solving): {', '.join(f'{n} {d:.2f}' for n, d in clone_mads)} levels.

## Results
Means over the inputs of each group (hole sizes 5% and 15% together):

{chr(10).join(means(ours, report['cases']))}

Per input:

{chr(10).join(lines)}

Time ratio ours/OpenCV (below 1 = ours faster), from median times: Telea
{min(ratios_telea):.2f}–{max(ratios_telea):.2f}; Poisson vs seamlessClone:
{', '.join(f'{n} {x:.2f}' for n, x in ratios_clone)}. From minimum times (less sensitive to other
load; in DIR/ours.json and DIR/opencv.json): Telea {min(min_telea):.2f}–{max(min_telea):.2f};
Poisson vs seamlessClone: {', '.join(f'{n} {x:.2f}' for n, x in min_clone)}.
PSNR rewards blur and SSIM rewards structure: read both, and look at the images in DIR.
"""
    with open(path, "w") as f:
        f.write(doc)


if __name__ == "__main__":
    sys.exit(main())
