//! Segmentation and cutting throughput over the demo corpus (bytes per second), with the
//! model's tokenizer for the token offsets. `cargo bench --bench split`.
use criterion::{criterion_group, criterion_main, Criterion, Throughput};

fn corpus() -> String {
    let mut files: Vec<_> = std::fs::read_dir(concat!(env!("CARGO_MANIFEST_DIR"), "/demo-texts"))
        .unwrap()
        .map(|e| e.unwrap().path())
        .filter(|p| p.extension().is_some_and(|e| e == "md" || e == "txt"))
        .collect();
    files.sort();
    files
        .iter()
        .map(|p| std::fs::read_to_string(p).unwrap())
        .collect::<Vec<_>>()
        .join("\n\n")
}

fn bench(c: &mut Criterion) {
    let text = corpus();
    let (info, counter) = kerf::model::inspect(&kerf::model::default_model_dir())
        .expect("run scripts/fetch-model first");
    let mut profile = kerf::profile::Profile::default();
    profile.cut.window = 256;
    let plan = kerf::plan::resolve(&profile, &info, &counter, "bench").unwrap();
    let tokens = counter.tokenize(&text).unwrap();
    let segs = kerf::segment::segment(&text);
    let mut g = c.benchmark_group("demo-texts");
    g.throughput(Throughput::Bytes(text.len() as u64));
    g.sample_size(20);
    g.bench_function("segment", |b| b.iter(|| kerf::segment::segment(&text)));
    g.bench_function("tokenize", |b| b.iter(|| counter.tokenize(&text).unwrap()));
    g.bench_function("cut-sentence-256", |b| {
        b.iter(|| {
            kerf::split::cut(&text, &tokens, &segs, &plan.cut, &|t| {
                counter.count_content(t).unwrap()
            })
        })
    });
    g.finish();
}

criterion_group!(benches, bench);
criterion_main!(benches);
