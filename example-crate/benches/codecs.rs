//! Throughput of the demo codecs, with baselines run in the same process: memcpy of the same
//! bytes, and miniz_oxide's raw deflate with the Huffman-only strategy. Compare the ratios,
//! not the absolute figures (shared machines are noisy).
//!
//!     cargo bench -p precast-example

use criterion::{criterion_group, criterion_main, Criterion, Throughput};
use miniz_oxide::deflate::core::{
    compress, create_comp_flags_from_zip_params, CompressorOxide, TDEFLFlush,
};
use miniz_oxide::deflate::CompressionLevel;
use precast_example::{field_notes, gauge_status};
use std::hint::black_box;

const N: usize = 1 << 18;

/// Field-notes text: the training sample repeated (the order-0 statistics are what count).
fn notes() -> Vec<u8> {
    let sample = include_bytes!("../samples/field_notes.txt");
    sample.iter().copied().cycle().take(N).collect()
}

/// Status words with the training sample's frequencies.
fn statuses() -> Vec<gauge_status::Symbol> {
    let text = include_str!("../samples/status_log.txt");
    let words: Vec<gauge_status::Symbol> = text
        .split_whitespace()
        .filter_map(gauge_status::Symbol::from_name)
        .collect();
    words.iter().copied().cycle().take(N).collect()
}

fn huffman_only(data: &[u8]) -> Vec<u8> {
    let flags = create_comp_flags_from_zip_params(CompressionLevel::DefaultLevel as i32, -15, 2);
    let mut c = Box::new(CompressorOxide::new(flags));
    let mut out = vec![0u8; data.len() + data.len() / 2 + 1024];
    let (_, _, written) = compress(&mut c, data, &mut out, TDEFLFlush::Finish);
    out.truncate(written);
    out
}

fn bench(c: &mut Criterion) {
    let text = notes();
    let mut g = c.benchmark_group("field_notes");
    g.throughput(Throughput::Bytes(N as u64));
    let mut stream = vec![0u8; field_notes::max_encoded_len(N)];
    let len = field_notes::encode(&text, &mut stream).unwrap();
    let mut back = vec![0u8; N];
    g.bench_function("precast encode", |b| {
        b.iter(|| field_notes::encode(black_box(&text), &mut stream).unwrap())
    });
    g.bench_function("precast decode", |b| {
        b.iter(|| field_notes::decode(black_box(&stream[..len]), &mut back).unwrap())
    });
    let mut copy = vec![0u8; N];
    g.bench_function("memcpy", |b| {
        b.iter(|| copy.copy_from_slice(black_box(&text)))
    });
    let packed = huffman_only(&text);
    g.bench_function("deflate huffman-only", |b| {
        b.iter(|| huffman_only(black_box(&text)))
    });
    g.bench_function("inflate huffman-only", |b| {
        b.iter(|| miniz_oxide::inflate::decompress_to_vec(black_box(&packed)).unwrap())
    });
    g.finish();
    eprintln!(
        "field_notes sizes: precast {len} B, huffman-only deflate {} B, for {N} symbols",
        packed.len()
    );

    let words = statuses();
    let mut g = c.benchmark_group("gauge_status");
    g.throughput(Throughput::Bytes(N as u64));
    let mut stream = vec![0u8; gauge_status::max_encoded_len(N)];
    let len = gauge_status::encode(&words, &mut stream).unwrap();
    let mut back = vec![gauge_status::Symbol::Ok; N];
    g.bench_function("precast encode", |b| {
        b.iter(|| gauge_status::encode(black_box(&words), &mut stream).unwrap())
    });
    g.bench_function("precast decode", |b| {
        b.iter(|| gauge_status::decode(black_box(&stream[..len]), &mut back).unwrap())
    });
    g.finish();
}

criterion_group! {
    name = benches;
    config = Criterion::default().sample_size(20).measurement_time(std::time::Duration::from_secs(2));
    targets = bench
}
criterion_main!(benches);
