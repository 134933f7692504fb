//! How to use two cores for inference: one single-threaded session per worker thread (what
//! `twinaudit run` does) versus one two-thread session fed batches. Model: the bundled
//! models-cpu/stall-vqa; inputs: 64 bundled demo scenes with a count question.
//! `cargo bench --bench engine` (needs tools/setup-runtime.sh).

use std::path::Path;
use std::sync::Arc;

use criterion::{criterion_group, criterion_main, Criterion};
use image::RgbImage;
use twinaudit::model::{Engine, Manifest};

const N_ITEMS: usize = 64;
const QUESTION: &str = "How many apples are there?";

fn inputs() -> (Arc<Manifest>, Vec<RgbImage>) {
    let root = Path::new(env!("CARGO_MANIFEST_DIR"));
    let manifest =
        Arc::new(Manifest::load(&root.join("models-cpu/stall-vqa.manifest.json")).unwrap());
    let images = (0..N_ITEMS)
        .map(|i| {
            let p = root.join(format!("demo-images/images/scene-{:05}.png", i % 60));
            twinaudit::imageio::load_rgb(&p).unwrap()
        })
        .collect();
    (manifest, images)
}

fn engines(c: &mut Criterion) {
    let (manifest, images) = inputs();
    let mut group = c.benchmark_group(format!("stall-vqa, {N_ITEMS} images"));
    group.sample_size(10);

    let mut workers: Vec<Engine> = (0..2)
        .map(|_| Engine::new(Arc::clone(&manifest), 1).unwrap())
        .collect();
    group.bench_function("two workers, one session each, single images", |b| {
        b.iter(|| {
            std::thread::scope(|s| {
                for (w, engine) in workers.iter_mut().enumerate() {
                    let images = &images;
                    s.spawn(move || {
                        for img in images.iter().skip(w).step_by(2) {
                            engine.predict(img, QUESTION).unwrap();
                        }
                    });
                }
            })
        })
    });

    let mut shared = Engine::new(Arc::clone(&manifest), 2).unwrap();
    for batch in [8usize, 32] {
        group.bench_function(format!("one two-thread session, batches of {batch}"), |b| {
            b.iter(|| {
                for chunk in images.chunks(batch) {
                    let items: Vec<(&RgbImage, &str)> =
                        chunk.iter().map(|i| (i, QUESTION)).collect();
                    shared.predict_batch(&items).unwrap();
                }
            })
        });
    }
    group.finish();
}

criterion_group!(benches, engines);
criterion_main!(benches);
