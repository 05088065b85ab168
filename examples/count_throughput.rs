//! Throughput of `precast count` (`load::count_files`) against a plain byte-histogram pass
//! over the same file, in one process: `cargo run --release --example
//! count_throughput [MiB]`. Speed is measured, not asserted. The corpus is Debian's word list
//! (`wamerican`) repeated, or, without it, SplitMix64 bytes; tokens are drawn from four
//! names with a fixed seed.

use precast::counts::CountKind;
use std::io::Read;
use std::path::Path;
use std::time::Instant;

/// SplitMix64 (Steele, Lea, Flood, OOPSLA 2014; from memory).
fn splitmix(state: &mut u64) -> u64 {
    *state = state.wrapping_add(0x9e37_79b9_7f4a_7c15);
    let mut z = *state;
    z = (z ^ (z >> 30)).wrapping_mul(0xbf58_476d_1ce4_e5b9);
    z = (z ^ (z >> 27)).wrapping_mul(0x94d0_49bb_1331_11eb);
    z ^ (z >> 31)
}

/// The best of five runs of `f`, in seconds.
fn best(mut f: impl FnMut()) -> f64 {
    (0..5)
        .map(|_| {
            let t = Instant::now();
            f();
            t.elapsed().as_secs_f64()
        })
        .fold(f64::INFINITY, f64::min)
}

/// A byte histogram, one pass in 1 MiB blocks on one thread: the baseline.
fn plain_histogram(path: &Path) -> [u64; 256] {
    let mut h = [0u64; 256];
    let mut file = std::fs::File::open(path).unwrap();
    let mut block = vec![0u8; 1 << 20];
    loop {
        let n = file.read(&mut block).unwrap();
        if n == 0 {
            return h;
        }
        for &b in &block[..n] {
            h[usize::from(b)] += 1;
        }
    }
}

fn main() {
    let mib: usize = std::env::args()
        .nth(1)
        .and_then(|a| a.parse().ok())
        .unwrap_or(256);
    let size = mib << 20;
    let dir = std::env::temp_dir().join(format!("precast-count-throughput-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let words = Path::new("/usr/share/dict/american-english");
    let mut bytes = Vec::with_capacity(size);
    let mut seed = 1u64;
    match std::fs::read(words) {
        Ok(w) => {
            println!("bytes corpus: {} repeated to {mib} MiB", words.display());
            while bytes.len() < size {
                bytes.extend_from_slice(&w[..w.len().min(size - bytes.len())]);
            }
        }
        Err(_) => {
            println!(
                "bytes corpus: {mib} MiB of SplitMix64 bytes ({} absent)",
                words.display()
            );
            while bytes.len() < size {
                bytes.extend_from_slice(&splitmix(&mut seed).to_le_bytes());
            }
            bytes.truncate(size);
        }
    }
    let byte_file = dir.join("bytes.bin");
    std::fs::write(&byte_file, &bytes).unwrap();
    drop(bytes);
    let names = ["ok", "low_battery", "sensor_fault", "reboot"];
    let mut tokens = String::with_capacity(size + 16);
    while tokens.len() < size {
        let r = splitmix(&mut seed) % 1000;
        tokens.push_str(
            names[if r < 900 {
                0
            } else if r < 960 {
                1
            } else if r < 990 {
                2
            } else {
                3
            }],
        );
        tokens.push(' ');
    }
    let token_file = dir.join("tokens.txt");
    std::fs::write(&token_file, &tokens).unwrap();
    drop(tokens);

    let cores = std::thread::available_parallelism().map_or(1, |n| n.get());
    println!("{cores} core(s); best of 5 runs, file in the page cache");
    let mb = size as f64 / 1e6;
    let plain = best(|| {
        std::hint::black_box(plain_histogram(&byte_file));
    });
    println!(
        "plain byte histogram, 1 thread:      {:8.1} MB/s",
        mb / plain
    );
    for threads in [1, cores] {
        let t = best(|| {
            std::hint::black_box(
                precast::load::count_files(
                    std::slice::from_ref(&byte_file),
                    CountKind::Bytes,
                    threads,
                )
                .unwrap(),
            );
        });
        println!(
            "count --kind bytes, {threads} thread(s):    {:8.1} MB/s ({:.2}x the plain pass)",
            mb / t,
            plain / t
        );
        let t = best(|| {
            std::hint::black_box(
                precast::load::count_files(
                    std::slice::from_ref(&token_file),
                    CountKind::Tokens,
                    threads,
                )
                .unwrap(),
            );
        });
        println!(
            "count --kind tokens, {threads} thread(s):   {:8.1} MB/s ({:.2}x the plain byte pass)",
            mb / t,
            plain / t
        );
    }
    let _ = std::fs::remove_dir_all(&dir);
}
