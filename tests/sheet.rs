//! `twinaudit sheet` on real runs of the known-answer fixtures (tests/data/known: tiny ONNX models
//! whose answers are computed by hand in EXPECTED.md, invented 64×64 tile scenes).
//!
//! What is checked against something outside the sheet code:
//! - row selection and order against the run's own results.jsonl rows, filtered and sorted here
//!   by hand;
//! - the difference map against a direct computation with the `image` 0.25 crate's pixel access
//!   (largest channel |a − b|; the definition is ours, common practice, no published source);
//! - outlines against the edited shape's boundary as given by `Mask::contains` (a boundary pixel
//!   is an inside pixel with an outside 8-neighbour: the usual inner boundary of digital topology,
//!   from memory);
//! - PNG pages decoded back with the `image` crate (sizes, rows per page).

mod common;

use std::collections::BTreeSet;
use std::path::{Path, PathBuf};

use common::{bin, config, known};
use twinaudit::audit::checker::Verdict;
use twinaudit::audit::replay::RunFolder;
use twinaudit::audit::results::{read_results, PairRecord, Status};
use twinaudit::audit::{run_audit, RunConfig};
use twinaudit::report::sheet::{
    difference_map, heat_colour, outline_band, page_height, row_pictures, row_text, select_rows,
    write_sheet, ImageSource, Outcome, PairSet, RowFilter, SheetConfig, SheetError, SheetIndex,
    SortKey, TextPainter, TextStyle, CELL_PX, PAGE_W, SHAPE_OUTLINE,
};
use twinaudit::spec::QuestionKind;

/// A run of the confounded counting model (flipped, held, moved elsewhere, moved to expected;
/// EXPECTED.md) with placebo controls, so every filter has something to keep and to drop.
fn confounded_run(save_edits: bool) -> (tempfile::TempDir, PathBuf, Vec<PairRecord>) {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("run");
    let cfg = RunConfig {
        save_edits,
        placebo: true,
        ..config(
            &known("specs/counting.json"),
            &known("count_red_confounded.manifest.json"),
            &out,
        )
    };
    run_audit(&cfg).unwrap();
    let rows = read_results(&out.join("results.jsonl")).unwrap();
    (dir, out, rows)
}

fn sheet_config(run: &Path, out: &Path) -> SheetConfig {
    SheetConfig {
        out_dir: out.to_path_buf(),
        ..SheetConfig::new(run)
    }
}

fn ids_of(index: &SheetIndex) -> Vec<String> {
    index
        .pages
        .iter()
        .flat_map(|p| p.rows.iter().map(|r| r.pair_id.clone()))
        .collect()
}

#[test]
fn pages_hold_the_requested_rows_in_file_order_with_their_lines() {
    let (dir, run, rows) = confounded_run(true);
    let out = dir.path().join("sheet");
    let cfg = SheetConfig {
        rows_per_page: 7,
        ..sheet_config(&run, &out)
    };
    let index = write_sheet(&cfg).unwrap();
    let n = rows.len();
    assert!(n > 14, "too few pairs ({n}) to fill several pages");
    assert_eq!(index.n_rows, n);
    assert_eq!(index.pages.len(), n.div_ceil(7));
    for (k, page) in index.pages.iter().enumerate() {
        let want = if k + 1 < index.pages.len() {
            7
        } else {
            n - 7 * k
        };
        assert_eq!(page.rows.len(), want, "page {}", page.page);
        let png = image::open(out.join(&page.file)).unwrap();
        assert_eq!(png.width(), PAGE_W);
        assert_eq!(png.height(), page_height(want), "{}", page.file);
    }
    // Every row names its pair and its line of results.jsonl (no blank lines in a fresh run).
    let text = std::fs::read_to_string(run.join("results.jsonl")).unwrap();
    let lines: Vec<&str> = text.lines().collect();
    for (i, entry) in index.pages.iter().flat_map(|p| &p.rows).enumerate() {
        assert_eq!(entry.row, i + 1);
        assert_eq!(entry.pair_id, rows[i].pair_id);
        let line: PairRecord = serde_json::from_str(lines[entry.line - 1]).unwrap();
        assert_eq!(line.pair_id, entry.pair_id);
        // Placebos that found no free background are error rows of the run: no edit to show.
        if rows[i].status == Status::Ok {
            assert_eq!(entry.edited_image, ImageSource::Saved);
            assert!(entry.problem.is_none());
        } else {
            assert_eq!(entry.edited_image, ImageSource::Unavailable);
            assert!(!entry.judged && entry.verdict == "not judged");
        }
    }
    // index.json on disk is what write_sheet returned.
    let on_disk: SheetIndex =
        serde_json::from_str(&std::fs::read_to_string(out.join("index.json")).unwrap()).unwrap();
    assert_eq!(on_disk, index);
}

#[test]
fn filters_keep_exactly_the_matching_results_rows() {
    let (_dir, run, rows) = confounded_run(false);
    let check = |name: &str, filter: RowFilter, keep: &dyn Fn(&PairRecord) -> bool| {
        let sel = select_rows(&run, &rows, &filter, SortKey::Line, false, None).unwrap();
        let got: Vec<&str> = sel
            .indices
            .iter()
            .map(|&i| rows[i].pair_id.as_str())
            .collect();
        let want: Vec<&str> = rows
            .iter()
            .filter(|r| keep(r))
            .map(|r| r.pair_id.as_str())
            .collect();
        assert!(!want.is_empty(), "{name}: the fixture run has no such pair");
        assert!(
            want.len() < rows.len(),
            "{name}: the filter keeps every pair"
        );
        assert_eq!(got, want, "{name}");
    };
    check(
        "verdict flipped",
        RowFilter {
            verdicts: vec![Verdict::Flipped],
            ..Default::default()
        },
        &|r| r.verdict == Some(Verdict::Flipped),
    );
    check(
        "verdict held or moved elsewhere",
        RowFilter {
            verdicts: vec![Verdict::Held, Verdict::MovedElsewhere],
            ..Default::default()
        },
        &|r| matches!(r.verdict, Some(Verdict::Held | Verdict::MovedElsewhere)),
    );
    check(
        "failed",
        RowFilter {
            outcome: Some(Outcome::Failed),
            ..Default::default()
        },
        &|r| r.passed == Some(false),
    );
    check(
        "passed",
        RowFilter {
            outcome: Some(Outcome::Passed),
            ..Default::default()
        },
        &|r| r.passed == Some(true),
    );
    check(
        "operation cover",
        RowFilter {
            operations: vec!["cover".into()],
            ..Default::default()
        },
        &|r| r.operation == "cover",
    );
    check(
        "role distractor",
        RowFilter {
            roles: vec!["distractor".into()],
            ..Default::default()
        },
        &|r| r.role == "distractor",
    );
    check(
        "label orange tile",
        RowFilter {
            labels: vec!["orange tile".into()],
            ..Default::default()
        },
        &|r| r.regions.iter().any(|g| g.label == "orange tile"),
    );
    check(
        "placebo controls",
        RowFilter {
            pairs: PairSet::Placebo,
            ..Default::default()
        },
        &|r| r.placebo_of.is_some(),
    );
    check(
        "real flipped distractor edits of orange tiles",
        RowFilter {
            pairs: PairSet::Real,
            verdicts: vec![Verdict::Flipped],
            roles: vec!["distractor".into()],
            labels: vec!["orange tile".into()],
            ..Default::default()
        },
        &|r| {
            r.placebo_of.is_none()
                && r.verdict == Some(Verdict::Flipped)
                && r.role == "distractor"
                && r.regions.iter().any(|g| g.label == "orange tile")
        },
    );
    // Every pair here is a count question: a colour filter keeps nothing, a count filter all.
    let colour = RowFilter {
        kinds: vec![QuestionKind::Colour],
        ..Default::default()
    };
    let sel = select_rows(&run, &rows, &colour, SortKey::Line, false, None).unwrap();
    assert!(sel.indices.is_empty());
}

/// The top confounder is the summary's first distractor label: for the model that counts
/// orange as red (EXPECTED.md), orange tiles on count questions.
#[test]
fn top_confounder_keeps_the_edits_of_the_worst_distractor_label() {
    let (_dir, run, rows) = confounded_run(false);
    let filter = RowFilter {
        top_confounder: true,
        verdicts: vec![Verdict::Flipped],
        ..Default::default()
    };
    let sel = select_rows(&run, &rows, &filter, SortKey::Line, false, None).unwrap();
    let c = sel.confounder.as_ref().unwrap();
    assert_eq!(c.label, "orange tile");
    assert_eq!(c.question_kind, QuestionKind::Count);
    let want: Vec<usize> = (0..rows.len())
        .filter(|&i| {
            let r = &rows[i];
            r.placebo_of.is_none()
                && r.role == "distractor"
                && r.verdict == Some(Verdict::Flipped)
                && r.regions.iter().all(|g| g.label == "orange tile")
        })
        .collect();
    assert!(!want.is_empty());
    assert_eq!(sel.indices, want);
    assert_eq!(c.flip_rate.n as usize, {
        rows.iter()
            .filter(|r| {
                r.placebo_of.is_none()
                    && r.role == "distractor"
                    && r.status == Status::Ok
                    && r.regions.iter().all(|g| g.label == "orange tile")
            })
            .count()
    });
}

#[test]
fn sorts_order_rows_by_confidence_area_and_pair_id() {
    let (_dir, run, rows) = confounded_run(false);
    let order = |sort, reverse| {
        select_rows(&run, &rows, &RowFilter::default(), sort, reverse, None)
            .unwrap()
            .indices
    };
    let by_conf = order(SortKey::Confidence, false);
    // Rows without an after answer (error rows) come last.
    let probs: Vec<f32> = by_conf
        .iter()
        .map(|&i| rows[i].after.as_ref().map_or(-1.0, |p| p.probability))
        .collect();
    assert!(probs.windows(2).all(|w| w[0] >= w[1]), "{probs:?}");
    let by_area = order(SortKey::Area, false);
    let areas: Vec<f64> = by_area
        .iter()
        .map(|&i| rows[i].area_fraction.unwrap_or(-1.0))
        .collect();
    assert!(areas.windows(2).all(|w| w[0] >= w[1]), "{areas:?}");
    let mut ids: Vec<&str> = rows.iter().map(|r| r.pair_id.as_str()).collect();
    ids.sort();
    let by_id: Vec<&str> = order(SortKey::PairId, false)
        .iter()
        .map(|&i| rows[i].pair_id.as_str())
        .collect();
    assert_eq!(by_id, ids);
    assert_eq!(
        order(SortKey::Line, false),
        (0..rows.len()).collect::<Vec<_>>()
    );
    let mut reversed = order(SortKey::Area, true);
    reversed.reverse();
    assert_eq!(reversed, by_area);
    // Ties keep file order: a stable sort.
    for w in by_area.windows(2) {
        if rows[w[0]].area_fraction == rows[w[1]].area_fraction {
            assert!(w[0] < w[1]);
        }
    }
    let limited = select_rows(
        &run,
        &rows,
        &RowFilter::default(),
        SortKey::Confidence,
        false,
        Some(5),
    )
    .unwrap();
    assert_eq!(limited.indices, by_conf[..5]);
    assert_eq!(limited.n_matching, rows.len());
}

/// Difference map = max over channels of |original − edited|, computed here pixel by pixel with
/// the `image` crate; zero wherever the two images agree, so zero outside the reach of an edit
/// that held and of every placebo (render/ leaves pixels outside `changed` bit-identical).
#[test]
fn heat_map_is_the_largest_channel_difference_and_zero_where_images_agree() {
    let (_dir, run, rows) = confounded_run(true);
    let mut folder = RunFolder::open(&run).unwrap();
    let mut n_checked_outside = 0;
    for r in rows.iter().filter(|r| r.status == Status::Ok) {
        let images = folder.pair_images(r).unwrap();
        let d = difference_map(&images.original, &images.edited).unwrap();
        for (x, y, a) in images.original.enumerate_pixels() {
            let b = images.edited.get_pixel(x, y);
            let want = (0..3)
                .map(|k| (a[k] as i16 - b[k] as i16).unsigned_abs())
                .max()
                .unwrap();
            assert_eq!(
                d.get_pixel(x, y)[0] as u16,
                want,
                "{} at ({x}, {y})",
                r.pair_id
            );
        }
        // Reach of these edits: dilation ≤ 2 px + Telea radius ≤ 5 px or cover ring ≤ 5 px.
        if r.verdict == Some(Verdict::Held) || r.placebo_of.is_some() {
            let reach = images.shape.dilate(8);
            for (x, y, v) in d.enumerate_pixels() {
                if !reach.contains(x, y) {
                    assert_eq!(
                        v[0], 0,
                        "{}: change at ({x}, {y}) far from the shape",
                        r.pair_id
                    );
                    n_checked_outside += 1;
                }
            }
        }
        // The thumbnail: max-pooled difference, coloured by the ramp; zero gets the zero colour.
        let pics = row_pictures(&images, &r.added_regions, CELL_PX).unwrap();
        for (tx, ty, v) in pics.difference.enumerate_pixels() {
            let ((x0, x1), (y0, y1)) = pics.thumb.source_span(tx, ty);
            let want = (y0..y1)
                .flat_map(|y| (x0..x1).map(move |x| (x, y)))
                .map(|(x, y)| d.get_pixel(x, y)[0])
                .max()
                .unwrap();
            assert_eq!(v[0], want);
            assert_eq!(*pics.heat.get_pixel(tx, ty), heat_colour(want));
        }
    }
    assert!(n_checked_outside > 1000);
    // Zero is one colour that no change shares.
    assert!((1..=255).all(|d| heat_colour(d) != heat_colour(0)));
}

/// Every outlined thumbnail pixel stands for a pixel on the shape's inner boundary, and every
/// boundary pixel of the shape is outlined somewhere (64×64 scenes are enlarged 3×).
#[test]
fn outline_lies_on_the_shapes_boundary() {
    let (_dir, run, rows) = confounded_run(true);
    let mut folder = RunFolder::open(&run).unwrap();
    for r in rows.iter().filter(|r| r.placebo_of.is_none()).take(8) {
        let images = folder.pair_images(r).unwrap();
        let shape = &images.shape;
        let pics = row_pictures(&images, &r.added_regions, CELL_PX).unwrap();
        assert_eq!((pics.thumb.width, pics.thumb.height), (192, 192));
        let on_boundary = |x: u32, y: u32| {
            shape.contains(x, y)
                && (-1i64..=1).any(|dy| {
                    (-1i64..=1).any(|dx| {
                        let (nx, ny) = (x as i64 + dx, y as i64 + dy);
                        nx < 0
                            || ny < 0
                            || nx >= 64
                            || ny >= 64
                            || !shape.contains(nx as u32, ny as u32)
                    })
                })
        };
        let mut outlined_sources = BTreeSet::new();
        for ty in 0..pics.thumb.height {
            for tx in 0..pics.thumb.width {
                if pics.outline[(ty * pics.thumb.width + tx) as usize] {
                    let ((x0, _), (y0, _)) = pics.thumb.source_span(tx, ty);
                    assert!(on_boundary(x0, y0), "{}: ({tx}, {ty})", r.pair_id);
                    assert_eq!(*pics.edited.get_pixel(tx, ty), SHAPE_OUTLINE);
                    outlined_sources.insert((x0, y0));
                }
            }
        }
        for y in 0..64 {
            for x in 0..64 {
                if on_boundary(x, y) {
                    assert!(
                        outlined_sources.contains(&(x, y)),
                        "{}: ({x}, {y}) not outlined",
                        r.pair_id
                    );
                }
            }
        }
    }
}

/// `RunFolder` keeps the last case's decoded scene; visiting pairs out of order (cases
/// interleaved) must give the same pictures as a fresh folder for each pair.
#[test]
fn pair_images_do_not_depend_on_the_order_pairs_are_read() {
    let (_dir, run, rows) = confounded_run(false);
    let judged: Vec<&PairRecord> = rows.iter().filter(|r| r.status == Status::Ok).collect();
    let mut shared = RunFolder::open(&run).unwrap();
    let mut order: Vec<usize> = (0..judged.len()).step_by(2).collect();
    order.extend((1..judged.len()).step_by(2).rev());
    for i in order {
        let r = judged[i];
        let a = shared.pair_images(r).unwrap();
        let b = RunFolder::open(&run).unwrap().pair_images(r).unwrap();
        assert!(a.original == b.original, "{}", r.pair_id);
        assert!(a.edited == b.edited, "{}", r.pair_id);
        assert!(a.shape == b.shape, "{}", r.pair_id);
    }
}

#[test]
fn outline_band_of_a_square() {
    // 6×6 square in an 8×8 image: band 1 = its 20 edge pixels, band 3 = all 36.
    let inside: Vec<bool> = (0..64)
        .map(|i| (1..7).contains(&(i % 8)) && (1..7).contains(&(i / 8)))
        .collect();
    assert_eq!(
        outline_band(&inside, 8, 8, 1)
            .iter()
            .filter(|&&b| b)
            .count(),
        20
    );
    assert_eq!(
        outline_band(&inside, 8, 8, 3)
            .iter()
            .filter(|&&b| b)
            .count(),
        36
    );
}

#[test]
fn every_row_writes_its_verdict_in_words() {
    let (_dir, _run, rows) = confounded_run(false);
    let words = |v: Verdict| match v {
        Verdict::Held => "held",
        Verdict::Flipped => "flipped",
        Verdict::MovedToExpected => "moved to expected",
        Verdict::MovedElsewhere => "moved elsewhere",
        Verdict::DidNotMove => "did not move",
    };
    let mut seen = BTreeSet::new();
    for (i, r) in rows.iter().enumerate() {
        let lines = row_text(r, i + 1, i + 1);
        let text: Vec<&str> = lines.iter().map(|l| l.text.as_str()).collect();
        let verdict_line = text.iter().find(|l| l.starts_with("verdict: ")).unwrap();
        let Some(v) = r.verdict else {
            assert!(
                verdict_line.starts_with("verdict: not judged ("),
                "{verdict_line}"
            );
            assert!(text.iter().any(|l| l.starts_with("error: ")));
            continue;
        };
        assert!(
            verdict_line.starts_with(&format!("verdict: {} (", words(v))),
            "{verdict_line}"
        );
        assert!(verdict_line.contains(if v.passed() { "passed" } else { "failed" }));
        seen.insert(words(v));
        let (b, a) = (r.before.as_ref().unwrap(), r.after.as_ref().unwrap());
        let answer = format!(
            "answer: {} {:.1}% → {} {:.1}%",
            b.answer,
            100.0 * b.probability as f64,
            a.answer,
            100.0 * a.probability as f64
        );
        assert!(text.contains(&answer.as_str()), "{text:?}");
        assert_eq!(text[0], r.pair_id);
        assert!(text[1].contains(&format!("results.jsonl line {}", i + 1)));
        assert!(text.iter().any(|l| l.contains(&r.question)));
    }
    assert!(seen.len() >= 3, "{seen:?}");
}

const ODD_SPEC: &str = r#"{
  "format_version": 1,
  "description": "Invented test spec: odd region labels and a duplicate on a known-answer scene.",
  "cases": [
    {
      "id": "odd",
      "image": "IMAGE",
      "question": "How many red tiles are there? <b>bold</b> “quoted”",
      "question_kind": "count",
      "answer": "3",
      "regions": [
        {"id": "red1", "label": "<script>alert(1)</script>", "role": "target", "box": [8, 8, 6, 6]},
        {"id": "red2", "label": "红色瓦片 Äpfel ✓ 🍎\nnew line", "role": "target", "box": [30, 8, 6, 6]},
        {"id": "red3", "label": "red tile", "role": "target", "box": [22, 42, 6, 6]},
        {"id": "or1", "label": "orange, tile", "role": "distractor", "box": [50, 12, 6, 6]}
      ],
      "edits": [
        {"id": "erase-script", "operation": "erase", "regions": {"ids": ["red1"]}},
        {"id": "erase-cjk", "operation": "erase", "regions": {"ids": ["red2"]}},
        {"id": "dup-red1", "operation": "duplicate", "regions": {"ids": ["red1"]}, "params": {"copies": 2, "blend": "paste"}},
        {"id": "dup-or1", "operation": "duplicate", "regions": {"ids": ["or1"]}}
      ]
    }
  ]
}"#;

fn odd_run(dir: &Path) -> PathBuf {
    let spec = dir.join("odd.json");
    let image = known("images/tiles_a.png");
    std::fs::write(&spec, ODD_SPEC.replace("IMAGE", image.to_str().unwrap())).unwrap();
    let out = dir.join("run");
    run_audit(&config(&spec, &known("count_red.manifest.json"), &out)).unwrap();
    out
}

/// Labels are drawn as glyphs, never interpreted; characters DejaVu Sans lacks become boxes.
#[test]
fn odd_labels_and_missing_glyphs_render_without_panic() {
    let dir = tempfile::tempdir().unwrap();
    let run = odd_run(dir.path());
    let out = dir.path().join("sheet");
    for label in ["<script>alert(1)</script>", "红色瓦片 Äpfel ✓ 🍎\nnew line"] {
        let cfg = SheetConfig {
            filter: RowFilter {
                labels: vec![label.into()],
                ..Default::default()
            },
            ..sheet_config(&run, &out)
        };
        let index = write_sheet(&cfg).unwrap();
        assert!(index.n_rows >= 1, "{label}");
        assert_eq!(index.n_rows_without_pictures, 0);
    }
    let rows = read_results(&run.join("results.jsonl")).unwrap();
    let script = rows.iter().find(|r| r.edit == "erase-script").unwrap();
    let text: Vec<String> = row_text(script, 1, 1).into_iter().map(|l| l.text).collect();
    assert!(text.iter().any(|l| l.contains("<script>alert(1)</script>")));

    let mut painter = TextPainter::new();
    let mut canvas = image::RgbImage::from_pixel(300, 40, image::Rgb([255, 255, 255]));
    // Four CJK characters and the emoji are not in DejaVu Sans; Ä and ✓ are.
    let drawn = painter.draw(
        &mut canvas,
        4,
        28,
        "红色瓦片 Äpfel ✓ 🍎",
        TextStyle::Body,
        image::Rgb([0, 0, 0]),
    );
    assert_eq!(drawn.n_missing, 5);
    assert_eq!(
        drawn.width_px,
        painter.measure("红色瓦片 Äpfel ✓ 🍎", TextStyle::Body)
    );
    assert!(canvas.pixels().any(|p| p[0] < 128), "nothing was drawn");
    // Wrapping a label longer than the column breaks it and never panics on multi-byte text.
    let long = twinaudit::report::sheet::TextLine {
        text: "红色瓦片".repeat(40),
        style: TextStyle::Body,
        chip: None,
    };
    let wrapped = painter.wrap(&[long], 200, 3);
    assert_eq!(wrapped.len(), 3);
    assert!(wrapped[2].text.ends_with('…'));
    for l in &wrapped {
        assert!(painter.measure(&l.text, l.style) <= 200, "{:?}", l.text);
    }
}

/// Duplicates: the added copies' boxes (record `added_regions`) are drawn dashed around them.
#[test]
fn added_objects_are_boxed() {
    let dir = tempfile::tempdir().unwrap();
    let run = odd_run(dir.path());
    let rows = read_results(&run.join("results.jsonl")).unwrap();
    let dup = rows.iter().find(|r| r.edit == "dup-red1").unwrap();
    assert_eq!(dup.added_regions.len(), 2);
    let mut folder = RunFolder::open(&run).unwrap();
    let images = folder.pair_images(dup).unwrap();
    let pics = row_pictures(&images, &dup.added_regions, CELL_PX).unwrap();
    let added = twinaudit::report::sheet::ADDED_OUTLINE;
    for b in &dup.added_regions {
        // The box is drawn one thumbnail pixel outside the copy, 3× enlarged.
        let (x0, y0) = (3 * b[0] - 1, 3 * b[1] - 1);
        let n = (x0..x0 + 3 * b[2] + 2)
            .filter(|&x| *pics.edited.get_pixel(x, y0) == added)
            .count();
        assert!(
            n > b[2] as usize,
            "box {b:?}: {n} dashed pixels on its top edge"
        );
    }
}

#[test]
fn re_rendered_rows_say_so_and_pages_do_not_depend_on_workers() {
    let (dir, run, _rows) = confounded_run(false);
    let mut pages = Vec::new();
    for jobs in [1, 2] {
        let out = dir.path().join(format!("sheet-{jobs}"));
        let cfg = SheetConfig {
            jobs,
            rows_per_page: 4,
            ..sheet_config(&run, &out)
        };
        let index = write_sheet(&cfg).unwrap();
        assert!(index
            .pages
            .iter()
            .flat_map(|p| &p.rows)
            .filter(|r| r.judged)
            .all(|r| r.edited_image == ImageSource::ReRendered));
        pages.push(
            index
                .pages
                .iter()
                .map(|p| std::fs::read(out.join(&p.file)).unwrap())
                .collect::<Vec<_>>(),
        );
    }
    assert!(pages[0] == pages[1], "pages differ between 1 and 2 workers");
}

#[test]
fn cli_json_lists_pages_and_an_earlier_sheet_is_replaced() {
    let (dir, run, rows) = confounded_run(true);
    let cmd = |extra: &[&str]| {
        let mut c = bin();
        c.arg("sheet").arg(&run).args(extra).arg("--json");
        let out = c.assert().success().get_output().stdout.clone();
        serde_json::from_slice::<SheetIndex>(&out).unwrap()
    };
    let all = cmd(&["--rows-per-page", "5"]);
    assert_eq!(all.n_rows, rows.len());
    assert!(run.join("sheet/page-0001.png").is_file());
    let flipped = cmd(&[
        "--verdict",
        "flipped",
        "--pairs",
        "real",
        "--sort",
        "confidence",
    ]);
    assert_eq!(
        flipped.n_rows,
        rows.iter()
            .filter(|r| r.placebo_of.is_none() && r.verdict == Some(Verdict::Flipped))
            .count()
    );
    // The second sheet replaced the first: only its own pages remain.
    let files: BTreeSet<String> = std::fs::read_dir(run.join("sheet"))
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .collect();
    let mut want: BTreeSet<String> = flipped.pages.iter().map(|p| p.file.clone()).collect();
    want.insert("index.json".into());
    assert_eq!(files, want);
    assert!(ids_of(&flipped).iter().all(|id| !id.ends_with("~placebo")));
    drop(dir);
}

fn stderr_of(args: &[&str]) -> String {
    let out = bin().args(args).assert().failure().get_output().clone();
    String::from_utf8(out.stderr).unwrap()
}

#[test]
fn bad_input_is_named() {
    let (dir, run, _rows) = confounded_run(false);
    let run_s = run.to_str().unwrap();

    let empty = dir.path().join("empty");
    std::fs::create_dir(&empty).unwrap();
    let e = stderr_of(&["sheet", empty.to_str().unwrap()]);
    assert!(
        e.contains("not a twinaudit run folder") && e.contains("run.json"),
        "{e}"
    );

    let e = stderr_of(&["sheet", run_s, "--verdict", "flopped"]);
    assert!(e.contains("flopped") && e.contains("--verdict"), "{e}");

    let e = stderr_of(&["sheet", run_s, "--rows-per-page", "0"]);
    assert!(e.contains("--rows-per-page") && e.contains("got 0"), "{e}");

    let e = stderr_of(&["sheet", run_s, "--label", "napkin"]);
    assert!(
        e.contains("\"napkin\"") && e.contains("\"orange tile\""),
        "{e}"
    );

    let e = stderr_of(&["sheet", run_s, "--operation", "blur"]);
    assert!(e.contains("\"blur\"") && e.contains("\"erase\""), "{e}");

    // An output folder holding anything but an earlier sheet is left alone.
    let busy = dir.path().join("busy");
    std::fs::create_dir(&busy).unwrap();
    std::fs::write(busy.join("notes.txt"), "mine").unwrap();
    let e = stderr_of(&["sheet", run_s, "--out", busy.to_str().unwrap()]);
    assert!(e.contains("notes.txt") && e.contains("--out"), "{e}");
    assert!(busy.join("notes.txt").is_file());

    // The library refuses the same without the command line.
    let cfg = SheetConfig {
        rows_per_page: 0,
        ..sheet_config(&run, &dir.path().join("s"))
    };
    let err = write_sheet(&cfg).unwrap_err();
    assert!(matches!(err, SheetError::RowsPerPage(0)), "{err}");
    assert!(err.to_string().contains("got 0"));

    // A run whose spec was moved away (no saved edits) stops before any page, naming the spec.
    let spec_copy = dir.path().join("counting.json");
    std::fs::copy(known("specs/counting.json"), &spec_copy).unwrap();
    let moved_run = dir.path().join("moved-run");
    run_audit(&config(
        &spec_copy,
        &known("count_red.manifest.json"),
        &moved_run,
    ))
    .unwrap();
    std::fs::remove_file(&spec_copy).unwrap();
    let e = stderr_of(&["sheet", moved_run.to_str().unwrap()]);
    assert!(
        e.contains("counting.json") && e.contains("cannot be read again"),
        "{e}"
    );
    assert!(!moved_run.join("sheet").exists());
}
