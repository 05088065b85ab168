//! Throughput of every bench codec (bench_codecs.toml: each dataset x method x lanes), with
//! baselines run in the same group on the same bytes: memcpy, and miniz_oxide's raw deflate
//! and inflate with the Huffman-only strategy. Compare the ratios, not the absolute figures
//! (shared machines are noisy); `cargo run --release -p precast-example --bin bench-report`
//! prints them as one table.
//!
//!     cargo bench -p precast-example

mod common;

use common::{Dataset, HuffmanOnly, N};
use criterion::{criterion_group, criterion_main, Criterion, SamplingMode, Throughput};
use std::time::Duration;

fn bench(c: &mut Criterion) {
    let codecs = common::codecs();
    for dataset in Dataset::ALL {
        let data = dataset.data(N);
        let mut g = c.benchmark_group(dataset.name());
        // Flat: calls take up to ~15 ms (deflate), so linear sampling would overrun the budget.
        g.sampling_mode(SamplingMode::Flat);
        g.throughput(Throughput::Bytes(N as u64));
        for codec in codecs.iter().filter(|c| c.dataset == dataset) {
            let mut run = (codec.prepare)(&data);
            assert!(run.round_trips(), "{} does not round-trip", codec.module);
            g.bench_function(format!("{} encode", codec.module), |b| {
                b.iter(|| run.encode())
            });
            g.bench_function(format!("{} decode", codec.module), |b| {
                b.iter(|| run.decode())
            });
            eprintln!("{}: {} B for {N} symbols", codec.module, run.encoded_len());
        }
        let mut copy = vec![0u8; N];
        g.bench_function("memcpy", |b| b.iter(|| common::memcpy(&data, &mut copy)));
        let mut huff = HuffmanOnly::new(N);
        huff.deflate(&data);
        let mut back = vec![0u8; N];
        assert_eq!(common::inflate(huff.packed(), &mut back), N);
        assert!(back == data, "Huffman-only deflate does not round-trip");
        g.bench_function("deflate huffman-only", |b| b.iter(|| huff.deflate(&data)));
        let packed = huff.packed().to_vec();
        g.bench_function("inflate huffman-only", |b| {
            b.iter(|| common::inflate(&packed, &mut back))
        });
        g.finish();
        eprintln!(
            "{}: huffman-only deflate {} B, entropy bound {:.0} B",
            dataset.name(),
            packed.len(),
            N as f64 * common::entropy_bits(&data) / 8.0
        );
    }
}

criterion_group! {
    name = benches;
    config = Criterion::default()
        .sample_size(20)
        .warm_up_time(Duration::from_millis(500))
        .measurement_time(Duration::from_secs(1));
    targets = bench
}
criterion_main!(benches);
