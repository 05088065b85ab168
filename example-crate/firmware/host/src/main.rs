//! The device bench, host side: builds the `precast-firmware` images, runs the measuring
//! ones under QEMU (`mps2-an386`, Cortex-M4, `-icount shift=0`), sizes and audits every
//! image, and prints one markdown report. Run it through `scripts/device-bench.sh`.
//!
//! Exit status: 0 when every round trip passed and no audited image links a panic path,
//! 1 when one did not (the report says which), 2 when the bench could not run (a missing
//! tool, a failed build, an invalid calibration). Performance is reported, never judged.

use std::collections::{BTreeMap, BTreeSet};
use std::fmt::Write as _;
use std::fs::File;
use std::path::{Path, PathBuf};
use std::process::{Command, ExitCode, Stdio};
use std::time::{Duration, Instant};

const TARGET: &str = "thumbv7em-none-eabihf";
/// Executed instructions per SysTick tick: under `-icount shift=0` one instruction is 1 ns
/// of virtual time, and the MPS2 SysTick runs at 25 MHz.
const INSTRUCTIONS_PER_TICK: u64 = 40;
const CODECS: [&str; 5] = [
    "gauge_status",
    "level_delta",
    "field_notes",
    "field_notes_ctx",
    "field_notes_ctx4",
];
/// The target for a context codec: it decodes in at most this many times the instructions a
/// symbol of the order-0 codec it extends (reported, not judged).
const CONTEXT_DECODE_TARGET: f64 = 1.3;

/// The order-0 codec a context codec (`NAME_ctx...`) extends, whose data it codes and whose
/// Huffman code is its baseline; `None` for an order-0 codec.
fn base_of(codec: &str) -> Option<&str> {
    codec.split_once("_ctx").map(|(base, _)| base)
}

/// The codec whose Huffman implementation is `codec`'s baseline.
fn huffman_of(codec: &str) -> &str {
    base_of(codec).unwrap_or(codec)
}
/// Opt-levels of the audited and sized images; the measuring image runs at the first two.
const OPTS: [&str; 3] = ["3", "s", "z"];
const BENCH_OPTS: [&str; 2] = ["3", "s"];
/// The flash images: (feature, implementation, direction).
const DIRECTIONS: [(&str, &str, &str); 4] = [
    ("precast-encode", "precast", "encode"),
    ("precast-decode", "precast", "decode"),
    ("huffman-encode", "huffman", "encode"),
    ("huffman-decode", "huffman", "decode"),
];
const QEMU: &str = "qemu-system-arm";
const QEMU_ARGS: [&str; 12] = [
    "-M",
    "mps2-an386",
    "-cpu",
    "cortex-m4",
    "-icount",
    "shift=0",
    "-nographic",
    "-monitor",
    "none",
    "-serial",
    "none",
    "-semihosting-config",
];
const QEMU_TIMEOUT: Duration = Duration::from_secs(120);

fn main() -> ExitCode {
    match run() {
        Ok(true) => ExitCode::SUCCESS,
        Ok(false) => ExitCode::from(1),
        Err(e) => {
            eprintln!("device-bench: {e}");
            ExitCode::from(2)
        }
    }
}

type Result<T> = std::result::Result<T, String>;

struct Tools {
    nm: PathBuf,
    objdump: PathBuf,
    size: PathBuf,
}

/// One built image.
struct Image {
    opt: &'static str,
    /// `bench`, `base` or a direction feature.
    name: &'static str,
    elf: PathBuf,
}

fn run() -> Result<bool> {
    let firmware = Path::new(env!("CARGO_MANIFEST_DIR"))
        .parent()
        .ok_or("no firmware folder")?
        .to_path_buf();
    let mut out_file = firmware.join("target/device-bench/report.md");
    let mut args = std::env::args().skip(1);
    while let Some(a) = args.next() {
        match a.as_str() {
            "--out" => out_file = PathBuf::from(args.next().ok_or("--out needs a file")?),
            "-h" | "--help" => {
                println!(
                    "usage: scripts/device-bench.sh [--out FILE]  (report also in {})",
                    out_file.display()
                );
                return Ok(true);
            }
            other => return Err(format!("unknown argument {other:?} (try --help)")),
        }
    }
    let tools = find_tools()?;
    let qemu_version = command_line(Command::new(QEMU).arg("--version"))
        .map_err(|e| format!("{e}: install QEMU (Debian: apt-get install qemu-system-arm)"))?;
    let rustc_version = command_line(Command::new("rustc").arg("--version"))?;

    // Build every image, one opt-level at a time (the profile's opt-level comes from the
    // environment, so each switch rebuilds only the firmware and cortex-m-rt).
    let images_dir = firmware.join("target/device-bench");
    let mut images = Vec::new();
    for opt in OPTS {
        let mut names: Vec<&'static str> = vec!["base"];
        if BENCH_OPTS.contains(&opt) {
            names.insert(0, "bench");
        }
        names.extend(DIRECTIONS.iter().map(|d| d.0));
        for name in names {
            let dest = images_dir
                .join(format!("opt-{opt}"))
                .join(format!("{name}.elf"));
            build(&firmware, opt, name, &dest)?;
            images.push(Image {
                opt,
                name,
                elf: dest,
            });
        }
    }

    let mut passed = true;
    let mut report = String::new();
    let mut problems = Vec::new();

    // Measure.
    let mut runs = BTreeMap::new();
    for image in images.iter().filter(|i| i.name == "bench") {
        eprintln!("device-bench: running opt-level {} under QEMU", image.opt);
        let run = run_bench(&image.elf)?;
        if !run.failures.is_empty() || !run.exit_ok || !run.done_ok {
            passed = false;
            problems.push(format!(
                "opt-level {}: the device reported failures (exit status {}):\n{}",
                image.opt,
                if run.exit_ok { "0" } else { "non-zero" },
                run.failures.join("\n")
            ));
        }
        runs.insert(image.opt, run);
    }
    // The Huffman streams must be exactly as long as their code lengths say.
    for (opt, run) in &runs {
        for codec in CODECS.into_iter().filter(|c| base_of(c).is_none()) {
            let bits = run
                .info
                .get(codec)
                .and_then(|m| m.get("data_huffman_bits"))
                .and_then(|v| v.parse::<u64>().ok());
            let bytes = run.bytes(codec, "huffman", "stream");
            let expected = bits.map(|b| 2 + b.div_ceil(8)); // a 2-byte count for 4096
            if bytes.is_none() || bytes != expected {
                passed = false;
                problems.push(format!("opt-level {opt}: {codec}: the Huffman stream has {bytes:?} bytes, its code lengths say {expected:?}"));
            }
        }
    }
    let Some(first) = runs.values().next() else {
        return Err("no measuring image ran".into());
    };
    let info = first.info.clone();

    // Size and audit.
    let mut sizes = BTreeMap::new();
    let mut audits = Vec::new();
    for image in &images {
        let syms = symbols(&tools, &image.elf)?;
        let flash = flash_bytes(&tools, &image.elf)?;
        sizes.insert((image.opt, image.name), (flash, syms));
        let audit = audit(&tools, &image.elf)?;
        if !audit.clean() {
            passed = false;
        }
        audits.push((image.opt, image.name, audit));
    }

    // The report.
    let cpu = std::fs::read_to_string("/proc/cpuinfo")
        .ok()
        .and_then(|c| {
            c.lines()
                .find(|l| l.starts_with("model name"))
                .and_then(|l| l.split(':').nth(1))
                .map(|s| s.trim().to_string())
        })
        .unwrap_or_else(|| "unknown".into());
    let r = &mut report;
    writeln!(
        r,
        "## precast on a Cortex-M4 (QEMU mps2-an386, -icount shift=0)\n"
    )
    .unwrap();
    writeln!(
        r,
        "Host {cpu}, {} cores; {qemu_version}; {rustc_version}; target {TARGET}, fat LTO, codegen-units 1, panic abort.",
        std::thread::available_parallelism().map_or(0, |n| n.get())
    )
    .unwrap();
    for (opt, run) in &runs {
        writeln!(
            r,
            "Calibration at opt-level {opt}: a loop of {} instructions took {} SysTick ticks = {} instructions; an empty measurement {} ticks.",
            run.calibration.0,
            run.calibration.1,
            run.calibration.1 * INSTRUCTIONS_PER_TICK,
            run.empty_ticks
        )
        .unwrap();
    }
    writeln!(r).unwrap();
    speed_table(r, &runs);
    size_table(r, &runs, &info);
    context_section(r, &runs, &info);
    flash_tables(r, &sizes, &info);
    function_table(r, &sizes);
    audit_section(r, &audits);
    if !problems.is_empty() {
        writeln!(r, "### Failures\n").unwrap();
        for p in &problems {
            writeln!(r, "- {p}").unwrap();
        }
        writeln!(r).unwrap();
    }
    writeln!(
        r,
        "Result: {}",
        if passed {
            "every round trip passed, every image is free of panic paths."
        } else {
            "FAILED (see above)."
        }
    )
    .unwrap();

    print!("{report}");
    if let Some(dir) = out_file.parent() {
        std::fs::create_dir_all(dir).map_err(|e| format!("{}: {e}", dir.display()))?;
    }
    std::fs::write(&out_file, &report).map_err(|e| format!("{}: {e}", out_file.display()))?;
    eprintln!("device-bench: report written to {}", out_file.display());
    Ok(passed)
}

// ---------------------------------------------------------------------------------------
// Tools, builds, QEMU

fn command_line(cmd: &mut Command) -> Result<String> {
    let out = cmd
        .output()
        .map_err(|e| format!("cannot run {:?}: {e}", cmd.get_program()))?;
    if !out.status.success() {
        return Err(format!(
            "{:?} failed: {}",
            cmd.get_program(),
            String::from_utf8_lossy(&out.stderr)
        ));
    }
    Ok(String::from_utf8_lossy(&out.stdout)
        .lines()
        .next()
        .unwrap_or("")
        .trim()
        .to_string())
}

fn find_tools() -> Result<Tools> {
    let sysroot = command_line(Command::new("rustc").args(["--print", "sysroot"]))?;
    let host =
        command_line(Command::new("rustc").args(["--print", "host-tuple"])).or_else(|_| {
            let out = Command::new("rustc")
                .arg("-vV")
                .output()
                .map_err(|e| e.to_string())?;
            String::from_utf8_lossy(&out.stdout)
                .lines()
                .find_map(|l| l.strip_prefix("host: ").map(str::to_string))
                .ok_or_else(|| "rustc -vV names no host".to_string())
        })?;
    let bin = Path::new(&sysroot)
        .join("lib/rustlib")
        .join(host)
        .join("bin");
    let tool = |name: &str| {
        let p = bin.join(name);
        if p.is_file() {
            Ok(p)
        } else {
            Err(format!(
                "{} not found: rustup component add llvm-tools",
                p.display()
            ))
        }
    };
    Ok(Tools {
        nm: tool("llvm-nm")?,
        objdump: tool("llvm-objdump")?,
        size: tool("llvm-size")?,
    })
}

fn build(firmware: &Path, opt: &str, name: &str, dest: &Path) -> Result<()> {
    eprintln!("device-bench: building {name} at opt-level {opt}");
    let mut cmd = Command::new("cargo");
    cmd.current_dir(firmware)
        .args([
            "build",
            "--release",
            "--quiet",
            "--target",
            TARGET,
            "--no-default-features",
        ])
        .env("CARGO_PROFILE_RELEASE_OPT_LEVEL", opt);
    if name != "base" {
        cmd.args(["--features", name]);
    }
    let status = cmd.status().map_err(|e| format!("cannot run cargo: {e}"))?;
    if !status.success() {
        return Err(format!(
            "building the {name} image at opt-level {opt} failed"
        ));
    }
    let elf = firmware
        .join("target")
        .join(TARGET)
        .join("release/precast-firmware");
    if let Some(dir) = dest.parent() {
        std::fs::create_dir_all(dir).map_err(|e| format!("{}: {e}", dir.display()))?;
    }
    std::fs::copy(&elf, dest).map_err(|e| format!("{}: {e}", elf.display()))?;
    Ok(())
}

/// (codec, implementation, `encode`/`decode`, `stream`/`frame`)
type FigureKey = (String, String, String, String);

/// What a measuring image printed.
struct Run {
    exit_ok: bool,
    done_ok: bool,
    info: BTreeMap<String, BTreeMap<String, String>>,
    calibration: (u64, u64),
    empty_ticks: u64,
    /// (codec, impl, op, shape) → (symbols, ticks, bytes)
    figures: BTreeMap<FigureKey, (u64, u64, u64)>,
    failures: Vec<String>,
}

impl Run {
    fn per_symbol(&self, codec: &str, imp: &str, op: &str, shape: &str) -> Option<f64> {
        let key = (
            codec.to_string(),
            imp.to_string(),
            op.to_string(),
            shape.to_string(),
        );
        self.figures
            .get(&key)
            .map(|&(symbols, ticks, _)| (ticks * INSTRUCTIONS_PER_TICK) as f64 / symbols as f64)
    }

    fn bytes(&self, codec: &str, imp: &str, shape: &str) -> Option<u64> {
        let key = (
            codec.to_string(),
            imp.to_string(),
            "encode".to_string(),
            shape.to_string(),
        );
        self.figures.get(&key).map(|f| f.2)
    }
}

fn run_bench(elf: &Path) -> Result<Run> {
    let log_path = elf.with_extension("log");
    let log = File::create(&log_path).map_err(|e| format!("{}: {e}", log_path.display()))?;
    let mut child = Command::new(QEMU)
        .args(QEMU_ARGS)
        .arg("enable=on,target=native")
        .arg("-kernel")
        .arg(elf)
        .stdin(Stdio::null())
        .stdout(log.try_clone().map_err(|e| e.to_string())?)
        .stderr(log)
        .spawn()
        .map_err(|e| format!("cannot run {QEMU}: {e}"))?;
    let start = Instant::now();
    let status = loop {
        if let Some(s) = child.try_wait().map_err(|e| e.to_string())? {
            break Some(s);
        }
        if start.elapsed() > QEMU_TIMEOUT {
            let _ = child.kill();
            let _ = child.wait();
            break None;
        }
        std::thread::sleep(Duration::from_millis(20));
    };
    let text =
        std::fs::read_to_string(&log_path).map_err(|e| format!("{}: {e}", log_path.display()))?;
    let mut run = Run {
        exit_ok: status.is_some_and(|s| s.success()),
        done_ok: false,
        info: BTreeMap::new(),
        calibration: (0, 0),
        empty_ticks: u64::MAX,
        figures: BTreeMap::new(),
        failures: Vec::new(),
    };
    if status.is_none() {
        run.failures.push(format!(
            "QEMU did not finish within {} s",
            QEMU_TIMEOUT.as_secs()
        ));
    }
    for line in text.lines() {
        let f: Vec<&str> = line.split_whitespace().collect();
        let num = |i: usize| f.get(i).and_then(|s| s.parse::<u64>().ok());
        match f.first().copied() {
            Some("I") if f.len() > 2 => {
                let kv = f[2..]
                    .iter()
                    .filter_map(|p| p.split_once('='))
                    .map(|(k, v)| (k.to_string(), v.to_string()));
                run.info.insert(f[1].to_string(), kv.collect());
            }
            Some("C") => match (num(1), num(2)) {
                (Some(0), Some(t)) => run.empty_ticks = t,
                (Some(e), Some(t)) => run.calibration = (e, t),
                _ => run.failures.push(format!("unreadable line: {line}")),
            },
            Some("M") if f.len() == 8 => match (num(5), num(6), num(7)) {
                (Some(symbols), Some(ticks), Some(bytes)) if symbols > 0 => {
                    let key = (
                        f[1].to_string(),
                        f[2].to_string(),
                        f[3].to_string(),
                        f[4].to_string(),
                    );
                    run.figures.insert(key, (symbols, ticks, bytes));
                }
                _ => run.failures.push(format!("unreadable line: {line}")),
            },
            Some("F") | Some("PANIC:") => run.failures.push(line.to_string()),
            Some("DONE") => run.done_ok = f.get(1) == Some(&"ok"),
            _ => {}
        }
    }
    // precast for every codec, Huffman for the order-0 ones.
    let expected = CODECS
        .iter()
        .map(|c| if base_of(c).is_some() { 1 } else { 2 })
        .sum::<usize>()
        * 4;
    if run.figures.len() != expected {
        run.failures.push(format!(
            "{} of {expected} figures reported (log: {})",
            run.figures.len(),
            log_path.display()
        ));
    }
    // The instruction counts mean something only if SysTick counts 40 instructions a tick.
    let (expected, ticks) = run.calibration;
    let counted = ticks * INSTRUCTIONS_PER_TICK;
    if expected == 0 || counted.abs_diff(expected) > 2 * INSTRUCTIONS_PER_TICK {
        return Err(format!(
            "calibration failed: a loop of {expected} instructions counted as {counted} ({ticks} ticks); is QEMU running with -icount shift=0? (log: {})",
            log_path.display()
        ));
    }
    Ok(run)
}

// ---------------------------------------------------------------------------------------
// Symbols, sizes, disassembly

struct Symbol {
    size: u64,
    /// nm's type letter: `t`/`T` code, `r`/`R`/`d`/`D` tables, `b`/`B` RAM.
    kind: char,
    name: String,
}

fn symbols(tools: &Tools, elf: &Path) -> Result<Vec<Symbol>> {
    let out = Command::new(&tools.nm)
        .args(["-C", "-S", "--size-sort"])
        .arg(elf)
        .output()
        .map_err(|e| format!("llvm-nm: {e}"))?;
    Ok(String::from_utf8_lossy(&out.stdout)
        .lines()
        .filter_map(|l| {
            let mut p = l.splitn(4, ' ');
            let _addr = p.next()?;
            let size = u64::from_str_radix(p.next()?, 16).ok()?;
            let kind = p.next()?.chars().next()?;
            Some(Symbol {
                size,
                kind,
                name: display(p.next()?),
            })
        })
        .collect())
}

/// Bytes the image takes in flash: every allocated section below RAM (vector table, code,
/// read-only data) plus the initial values of `.data`.
fn flash_bytes(tools: &Tools, elf: &Path) -> Result<u64> {
    let out = Command::new(&tools.size)
        .arg("-A")
        .arg(elf)
        .output()
        .map_err(|e| format!("llvm-size: {e}"))?;
    // cortex-m-rt's link.x: these go to FLASH (`.data` as its load image); `.bss` and
    // `.uninit` are RAM only.
    const FLASH: [&str; 5] = [".vector_table", ".text", ".rodata", ".data", ".gnu.sgstubs"];
    let mut total = 0;
    for l in String::from_utf8_lossy(&out.stdout).lines() {
        let f: Vec<&str> = l.split_whitespace().collect();
        if let [name, size, _addr] = f[..] {
            if FLASH.contains(&name) {
                total += size
                    .parse::<u64>()
                    .map_err(|e| format!("llvm-size: {l}: {e}"))?;
            }
        }
    }
    Ok(total)
}

/// A demangled name made readable: no hash, `<impl [T]>` for `_$LT$impl$u20$$u5b$T$u5d$$GT$`.
fn display(name: &str) -> String {
    let mut s = name.to_string();
    if let Some(i) = s.rfind("::h") {
        if s.len() - i == 19 && s[i + 3..].bytes().all(|b| b.is_ascii_hexdigit()) {
            s.truncate(i);
        }
    }
    for (from, to) in [
        ("_$LT$", "<"),
        ("$LT$", "<"),
        ("$GT$", ">"),
        ("$u20$", " "),
        ("$u5b$", "["),
        ("$u5d$", "]"),
        ("$RF$", "&"),
        ("$C$", ","),
        ("$u7b$", "{"),
        ("$u7d$", "}"),
        ("$BP$", "*"),
        ("..", "::"),
    ] {
        s = s.replace(from, to);
    }
    s
}

/// Whether a function is part of the panic machinery.
fn is_panic(name: &str) -> bool {
    const MARKS: [&str; 11] = [
        "panic",
        "slice_index",
        "slice_start_index",
        "slice_end_index",
        "index_order_fail",
        "len_mismatch",
        "unwrap_failed",
        "expect_failed",
        "bounds_check",
        "rust_begin_unwind",
        "firmware_panic_trap",
    ];
    MARKS.iter().any(|m| name.contains(m)) || name.contains("assert_failed")
}

struct Audit {
    /// Panic-machinery symbols linked into the image.
    linked: Vec<String>,
    /// Functions outside the panic machinery that can reach it, with the panic functions
    /// they branch to directly (empty when they reach it through another such function).
    reaching: BTreeMap<String, BTreeSet<String>>,
    /// Whether the panic handler (`rust_begin_unwind`, `firmware_panic_trap`) is linked.
    handler: bool,
    /// Functions holding a `udf` (an abort trap), outside cortex-m-rt's start-up code.
    traps: BTreeSet<String>,
}

impl Audit {
    fn clean(&self) -> bool {
        self.linked.is_empty() && self.reaching.is_empty()
    }
}

/// Disassembles `elf`, builds its call graph from direct branches (`b`, `bl`, conditional
/// branches, `cbz`/`cbnz`) between functions, and finds every function that can reach the
/// panic machinery.
fn audit(tools: &Tools, elf: &Path) -> Result<Audit> {
    let out = Command::new(&tools.objdump)
        .args(["-d", "-C", "--no-show-raw-insn"])
        .arg(elf)
        .output()
        .map_err(|e| format!("llvm-objdump: {e}"))?;
    let text = String::from_utf8_lossy(&out.stdout);
    let mut calls: BTreeMap<String, BTreeSet<String>> = BTreeMap::new();
    let mut functions = BTreeSet::new();
    let mut current = String::new();
    let mut traps = BTreeSet::new();
    for line in text.lines() {
        if let Some(head) = line.strip_suffix(">:") {
            if let Some((_, name)) = head.split_once(" <") {
                current = display(name);
                functions.insert(current.clone());
            }
            continue;
        }
        // "    45c:      \tbl\t0x7530 <name> @ imm = #0x70d0"
        let mut parts = line.trim_start().splitn(3, '\t');
        let (Some(addr), Some(mnemonic), Some(operands)) =
            (parts.next(), parts.next(), parts.next())
        else {
            continue;
        };
        if !addr.trim_end().ends_with(':') {
            continue;
        }
        if mnemonic.trim() == "udf" && !matches!(current.as_str(), "__stext" | "Reset") {
            traps.insert(current.clone());
        }
        if !is_branch(mnemonic.trim()) {
            continue;
        }
        let Some(target) = branch_target(operands) else {
            continue;
        };
        if target != current {
            calls.entry(current.clone()).or_default().insert(target);
        }
    }
    let linked: Vec<String> = functions.iter().filter(|f| is_panic(f)).cloned().collect();
    let mut reach: BTreeSet<String> = linked.iter().cloned().collect();
    loop {
        let more: Vec<String> = calls
            .iter()
            .filter(|(f, targets)| !reach.contains(*f) && targets.iter().any(|t| reach.contains(t)))
            .map(|(f, _)| f.clone())
            .collect();
        if more.is_empty() {
            break;
        }
        reach.extend(more);
    }
    let reaching = reach
        .iter()
        .filter(|f| !is_panic(f))
        .map(|f| {
            let direct = calls
                .get(f)
                .map(|t| t.iter().filter(|t| is_panic(t)).cloned().collect())
                .unwrap_or_default();
            (f.clone(), direct)
        })
        .collect();
    let handler = functions
        .iter()
        .any(|f| f.contains("firmware_panic_trap") || f.contains("rust_begin_unwind"));
    Ok(Audit {
        linked,
        reaching,
        handler,
        traps,
    })
}

fn is_branch(m: &str) -> bool {
    let m = m.trim_end_matches(".w").trim_end_matches(".n");
    if m.starts_with("cb") {
        return m == "cbz" || m == "cbnz";
    }
    if !m.starts_with('b') || m.starts_with("bic") || m.starts_with("bf") || m.starts_with("bkpt") {
        return false;
    }
    // b, bl, blx, bx and the conditional forms (beq, bne, bhs, ...)
    m.len() <= 4
}

/// The function a branch's operands name: `0x7530 <name+0x1a> @ imm = ...` → `name`.
fn branch_target(operands: &str) -> Option<String> {
    let start = operands.find('<')? + 1;
    let rest = &operands[start..];
    let end = rest.rfind('>')?;
    let mut name = &rest[..end];
    if let Some(i) = name.rfind("+0x") {
        name = &name[..i];
    }
    Some(display(name))
}

// ---------------------------------------------------------------------------------------
// The report

fn speed_table(r: &mut String, runs: &BTreeMap<&str, Run>) {
    writeln!(r, "### Instructions per symbol\n").unwrap();
    writeln!(r, "Executed instructions (SysTick ticks × 40) divided by symbols. Stream: one call on 4096 symbols. Frame: 64-symbol frames, each its own stream (one call per frame, header included), averaged over {} frames. Data, seeded: `gauge_status` and `field_notes` an order-1 Markov chain of their training samples' pairs (the context codecs `field_notes_ctx*` code the same notes, and their Huffman cells are `field_notes`'); `level_delta` a gauge's readings stepped like the demo's simulation.\n", 4 * 64).unwrap();
    writeln!(
        r,
        "| codec | opt | encode stream | decode stream | encode frame | decode frame |"
    )
    .unwrap();
    writeln!(r, "|---|---|---|---|---|---|").unwrap();
    for codec in CODECS {
        for (opt, run) in runs {
            let cell = |op: &str, shape: &str| {
                let p = run.per_symbol(codec, "precast", op, shape);
                let h = run.per_symbol(huffman_of(codec), "huffman", op, shape);
                match (p, h) {
                    (Some(p), Some(h)) => format!("{p:.1} / {h:.1} ({:.2}×)", p / h),
                    _ => "missing".into(),
                }
            };
            writeln!(
                r,
                "| {codec} | {opt} | {} | {} | {} | {} |",
                cell("encode", "stream"),
                cell("decode", "stream"),
                cell("encode", "frame"),
                cell("decode", "frame")
            )
            .unwrap();
        }
    }
    writeln!(
        r,
        "\nEach cell: precast / Huffman (precast ÷ Huffman). Lower is faster.\n"
    )
    .unwrap();
    let mut slower = Vec::new();
    for codec in CODECS {
        for (opt, run) in runs {
            for (op, shape) in [
                ("encode", "stream"),
                ("decode", "stream"),
                ("encode", "frame"),
                ("decode", "frame"),
            ] {
                if let (Some(p), Some(h)) = (
                    run.per_symbol(codec, "precast", op, shape),
                    run.per_symbol(huffman_of(codec), "huffman", op, shape),
                ) {
                    if p > h {
                        slower.push(format!("{codec} {op} {shape} at opt {opt}"));
                    }
                }
            }
        }
    }
    let cells = CODECS.len() * runs.len() * 4;
    if slower.len() == cells {
        writeln!(r, "precast needs more instructions a symbol than Huffman in all {cells} cells (reported, not failed).\n").unwrap();
    } else if !slower.is_empty() {
        writeln!(r, "precast needs more instructions a symbol than Huffman in {} of {cells} cells (reported, not failed): {}.\n", slower.len(), slower.join(", ")).unwrap();
    }
}

fn size_table(
    r: &mut String,
    runs: &BTreeMap<&str, Run>,
    info: &BTreeMap<String, BTreeMap<String, String>>,
) {
    let Some(run) = runs.values().next() else {
        return;
    };
    let get = |codec: &str, k: &str| {
        info.get(codec)
            .and_then(|m| m.get(k))
            .and_then(|v| v.parse::<f64>().ok())
            .unwrap_or(f64::NAN)
    };
    writeln!(r, "### Stream sizes\n").unwrap();
    writeln!(r, "Bytes, headers included (precast: format, fingerprint, count; Huffman: count). Bound: N·H/8 with H the order-0 entropy of the data (H train: of the training counts; for `level_delta` both are of its bins plus their offset bits). H(X|Y): the entropy of a symbol given the one before it, of the data (plug-in estimate on 4096 symbols, which runs low) and of the training pairs. A context codec's row holds the data figures and the Huffman code of the codec it extends.\n").unwrap();
    writeln!(r, "| codec | H train | H data | H(X\\|Y) train | H(X\\|Y) data | bound 4096 | precast 4096 | Huffman 4096 | precast ÷ bound | Huffman ÷ bound | precast ÷ Huffman | bound 64 | precast 64 | Huffman 64 |").unwrap();
    writeln!(
        r,
        "|---|---|---|---|---|---|---|---|---|---|---|---|---|---|"
    )
    .unwrap();
    for codec in CODECS {
        let data = huffman_of(codec);
        let h = get(data, "data_entropy");
        let bound = 4096.0 * h / 8.0;
        let p = run.bytes(codec, "precast", "stream").unwrap_or(0) as f64;
        let u = run.bytes(data, "huffman", "stream").unwrap_or(0) as f64;
        let pf = run.bytes(codec, "precast", "frame").unwrap_or(0) as f64 / 64.0;
        let uf = run.bytes(data, "huffman", "frame").unwrap_or(0) as f64 / 64.0;
        let cond = |k: &str| {
            let v = get(codec, k);
            let v = if v.is_nan() { get(data, k) } else { v };
            if v.is_nan()
                || info
                    .get(data)
                    .is_some_and(|m| m.get("kind").is_some_and(|k| k == "integers"))
            {
                "-".to_string()
            } else {
                format!("{v:.4}")
            }
        };
        writeln!(
            r,
            "| {codec} | {:.4} | {h:.4} | {} | {} | {bound:.0} | {p:.0} | {u:.0} | {:.3} | {:.3} | {:.3} | {:.1} | {pf:.1} | {uf:.1} |",
            get(data, "entropy"),
            cond("train_cond_entropy"),
            cond("data_cond_entropy"),
            p / bound,
            u / bound,
            p / u,
            64.0 * h / 8.0
        )
        .unwrap();
    }
    writeln!(r).unwrap();
    writeln!(r, "| codec | table_bits | table sets | precast rate (exact, bits/symbol) | Huffman max code bits | Huffman rate (limited) | Huffman rate (unlimited, longest code) |").unwrap();
    writeln!(r, "|---|---|---|---|---|---|---|").unwrap();
    for codec in CODECS {
        let text = |c: &str, k: &str| {
            info.get(c)
                .and_then(|m| m.get(k))
                .cloned()
                .unwrap_or_else(|| "-".into())
        };
        let h = huffman_of(codec);
        writeln!(
            r,
            "| {codec} | {} | {} | {} | {} | {} | {} ({}) |",
            text(codec, "table_bits"),
            if base_of(codec).is_some() {
                text(codec, "sets")
            } else {
                "1".into()
            },
            text(codec, "exact_rate"),
            text(h, "huffman_max_bits"),
            text(h, "huffman_rate"),
            text(h, "huffman_rate_unlimited"),
            text(h, "huffman_longest_unlimited")
        )
        .unwrap();
    }
    writeln!(r, "\nRates include the offset bits for `level_delta` (precast: the exact rate of its tables plus the mean offset bits of the training values).\n").unwrap();
}

/// Context codecs against the order-0 codec they extend: instructions, sizes, tables.
fn context_section(
    r: &mut String,
    runs: &BTreeMap<&str, Run>,
    info: &BTreeMap<String, BTreeMap<String, String>>,
) {
    let contexts: Vec<(&str, &str)> = CODECS
        .iter()
        .filter_map(|&c| base_of(c).map(|b| (c, b)))
        .collect();
    if contexts.is_empty() {
        return;
    }
    let text = |c: &str, k: &str| {
        info.get(c)
            .and_then(|m| m.get(k))
            .cloned()
            .unwrap_or_else(|| "-".into())
    };
    writeln!(r, "### Context codecs against order 0\n").unwrap();
    writeln!(r, "Each lane's previous symbol chooses the table set of the next. Instructions a symbol of the context codec ÷ those of the order-0 codec it extends, on the same data. Target: decode at no more than {CONTEXT_DECODE_TARGET}× (reported, not judged).\n").unwrap();
    writeln!(
        r,
        "| codec | opt | encode stream | decode stream | encode frame | decode frame |"
    )
    .unwrap();
    writeln!(r, "|---|---|---|---|---|---|").unwrap();
    let mut missed = Vec::new();
    for &(codec, base) in &contexts {
        for (opt, run) in runs {
            let cell = |op: &str, shape: &str| match (
                run.per_symbol(codec, "precast", op, shape),
                run.per_symbol(base, "precast", op, shape),
            ) {
                (Some(c), Some(b)) => format!("{c:.1} / {b:.1} ({:.2}×)", c / b),
                _ => "missing".into(),
            };
            for shape in ["stream", "frame"] {
                if let (Some(c), Some(b)) = (
                    run.per_symbol(codec, "precast", "decode", shape),
                    run.per_symbol(base, "precast", "decode", shape),
                ) {
                    if c > CONTEXT_DECODE_TARGET * b {
                        missed.push(format!(
                            "{codec} decode {shape} at opt {opt} ({:.2}×)",
                            c / b
                        ));
                    }
                }
            }
            writeln!(
                r,
                "| {codec} | {opt} | {} | {} | {} | {} |",
                cell("encode", "stream"),
                cell("decode", "stream"),
                cell("encode", "frame"),
                cell("decode", "frame")
            )
            .unwrap();
        }
    }
    writeln!(r, "\nEach cell: context / order 0 (context ÷ order 0).\n").unwrap();
    if missed.is_empty() {
        writeln!(
            r,
            "The decode target ({CONTEXT_DECODE_TARGET}×) holds in every cell.\n"
        )
        .unwrap();
    } else {
        writeln!(
            r,
            "The decode target ({CONTEXT_DECODE_TARGET}×) is missed in: {}.\n",
            missed.join(", ")
        )
        .unwrap();
    }
    let Some(run) = runs.values().next() else {
        return;
    };
    writeln!(r, "| codec | table sets (most) | tables, bytes | order-0 tables | held-out gain (precast) | H(X) data | H(X\\|Y) data | H(X\\|Y) train | 4096 context | 4096 order 0 | 4096 Huffman | 64 context | 64 order 0 | 64 Huffman |").unwrap();
    writeln!(
        r,
        "|---|---|---|---|---|---|---|---|---|---|---|---|---|---|"
    )
    .unwrap();
    for &(codec, base) in &contexts {
        let bytes = |c: &str, imp: &str, shape: &str| {
            let b = run.bytes(c, imp, shape).unwrap_or(0) as f64;
            if shape == "frame" {
                format!("{:.1}", b / 64.0)
            } else {
                format!("{b:.0}")
            }
        };
        writeln!(
            r,
            "| {codec} | {} ({}) | {} | {} | {} % | {} | {} | {} | {} | {} | {} | {} | {} | {} |",
            text(codec, "sets"),
            text(codec, "most_sets"),
            text(codec, "precast_table_bytes"),
            text(base, "precast_table_bytes"),
            text(codec, "held_gain"),
            text(base, "data_entropy"),
            text(base, "data_cond_entropy"),
            text(codec, "train_cond_entropy"),
            bytes(codec, "precast", "stream"),
            bytes(base, "precast", "stream"),
            bytes(base, "huffman", "stream"),
            bytes(codec, "precast", "frame"),
            bytes(base, "precast", "frame"),
            bytes(base, "huffman", "frame"),
        )
        .unwrap();
    }
    writeln!(r, "\nHeld-out gain: precast's report, percent below one table set on every fifth block of 256 training symbols. Sizes in bytes (64: mean per frame).\n").unwrap();
}

type Sizes = BTreeMap<(&'static str, &'static str), (u64, Vec<Symbol>)>;

/// (code, tables) bytes of one codec's symbols in an image.
fn attributed(syms: &[Symbol], imp: &str, codec: &str) -> (u64, u64) {
    let prefixes: Vec<String> = if imp == "precast" {
        vec![format!("precast_firmware::codecs::{codec}::")]
    } else {
        vec![
            format!("precast_firmware::huffman::{codec}::"),
            format!("precast_firmware::huffman::codec::{codec}::"),
        ]
    };
    let mut code = 0;
    let mut tables = 0;
    for s in syms {
        if prefixes.iter().any(|p| s.name.starts_with(p.as_str())) {
            match s.kind {
                't' | 'T' => code += s.size,
                'r' | 'R' | 'd' | 'D' => tables += s.size,
                _ => {}
            }
        }
    }
    (code, tables)
}

fn flash_tables(r: &mut String, sizes: &Sizes, _info: &BTreeMap<String, BTreeMap<String, String>>) {
    writeln!(r, "### Flash per direction\n").unwrap();
    writeln!(r, "From images holding one implementation and one direction of all its codecs (`--gc-sections`). Per codec: its functions' code bytes + its tables' bytes (llvm-nm sizes of the symbols in its module).\n").unwrap();
    writeln!(
        r,
        "| codec | opt | precast encode | precast decode | Huffman encode | Huffman decode |"
    )
    .unwrap();
    writeln!(r, "|---|---|---|---|---|---|").unwrap();
    for codec in CODECS {
        for opt in OPTS {
            let mut cells = Vec::new();
            for (feature, imp, _) in DIRECTIONS {
                if imp == "huffman" && base_of(codec).is_some() {
                    cells.push("-".into());
                    continue;
                }
                match sizes.get(&(opt, feature)) {
                    Some((_, syms)) => {
                        let (code, tables) = attributed(syms, imp, codec);
                        cells.push(format!("{code} + {tables}"));
                    }
                    None => cells.push("missing".into()),
                }
            }
            writeln!(r, "| {codec} | {opt} | {} |", cells.join(" | ")).unwrap();
        }
    }
    writeln!(r, "\nEach cell: code + tables, bytes. The linker keeps one copy of identical functions, named after one of the codecs, so a codec's code bytes can leave out helpers it shares with another (the context codecs share `Writer::flush`, `Reader::refill` and more with `field_notes`).\n").unwrap();
    writeln!(r, "Whole images against the baseline image (start-up and exit only): what one direction of all the codecs adds to flash, shared helpers included (precast: the five codecs, Huffman: the three order-0 ones).\n").unwrap();
    writeln!(
        r,
        "| opt | baseline | precast encode | precast decode | Huffman encode | Huffman decode |"
    )
    .unwrap();
    writeln!(r, "|---|---|---|---|---|---|").unwrap();
    let mut helper_lines = Vec::new();
    for opt in OPTS {
        let Some((base, base_syms)) = sizes.get(&(opt, "base")) else {
            continue;
        };
        let base_names: BTreeSet<&str> = base_syms.iter().map(|s| s.name.as_str()).collect();
        let mut cells = Vec::new();
        for (feature, _, _) in DIRECTIONS {
            let Some((flash, syms)) = sizes.get(&(opt, feature)) else {
                cells.push("missing".into());
                continue;
            };
            cells.push(format!("+{}", flash.saturating_sub(*base)));
            let helpers: Vec<String> = syms
                .iter()
                .filter(|s| {
                    matches!(s.kind, 't' | 'T')
                        && !base_names.contains(s.name.as_str())
                        && !is_codec_or_stub(&s.name)
                })
                .map(|s| format!("{} {}", s.name, s.size))
                .collect();
            if !helpers.is_empty() {
                helper_lines.push(format!("- opt {opt}, {feature}: {}", helpers.join(", ")));
            }
        }
        writeln!(r, "| {opt} | {base} | {} |", cells.join(" | ")).unwrap();
    }
    writeln!(
        r,
        "\nFunctions these images link besides the codecs' own (bytes):\n"
    )
    .unwrap();
    if helper_lines.is_empty() {
        writeln!(r, "- none").unwrap();
    }
    for l in helper_lines {
        writeln!(r, "{l}").unwrap();
    }
    writeln!(r).unwrap();
}

/// The codecs' own functions, and the images' calling stub (which differs from the baseline
/// only by the calls it makes).
fn is_codec_or_stub(name: &str) -> bool {
    name.starts_with("precast_firmware::codecs::")
        || name.starts_with("precast_firmware::huffman::")
        || name.starts_with("precast_firmware::keep::")
        || name == "precast_firmware::__cortex_m_rt_main"
        || name == "core::hint::black_box"
}

fn function_table(r: &mut String, sizes: &Sizes) {
    writeln!(r, "### Code bytes of each function\n").unwrap();
    writeln!(r, "Every function of the codecs' modules left out of line in the flash images (llvm-nm --size-sort), bytes.\n").unwrap();
    let mut rows: BTreeMap<String, BTreeMap<&str, u64>> = BTreeMap::new();
    for opt in OPTS {
        for (feature, _, _) in DIRECTIONS {
            let Some((_, syms)) = sizes.get(&(opt, feature)) else {
                continue;
            };
            for s in syms.iter().filter(|s| matches!(s.kind, 't' | 'T')) {
                if let Some(short) = s.name.strip_prefix("precast_firmware::") {
                    if short.starts_with("codecs::") || short.starts_with("huffman::") {
                        rows.entry(short.to_string())
                            .or_default()
                            .insert(opt, s.size);
                    }
                }
            }
        }
    }
    writeln!(r, "| function | opt 3 | opt s | opt z |").unwrap();
    writeln!(r, "|---|---|---|---|").unwrap();
    for (name, by_opt) in &rows {
        let cell = |o: &str| by_opt.get(o).map_or("-".to_string(), |s| s.to_string());
        writeln!(
            r,
            "| `{name}` | {} | {} | {} |",
            cell("3"),
            cell("s"),
            cell("z")
        )
        .unwrap();
    }
    writeln!(r).unwrap();
}

fn audit_section(r: &mut String, audits: &[(&str, &str, Audit)]) {
    writeln!(r, "### No-panic audit\n").unwrap();
    writeln!(r, "Every image: no panic machinery linked (`panic*`, `slice_index*`, `len_mismatch`, `unwrap_failed`, `rust_begin_unwind`, the firmware's `firmware_panic_trap`, ...), and no direct branch from any function to it (llvm-objdump call graph).\n").unwrap();
    writeln!(r, "| opt | image | result | panic handler linked | functions that can reach a panic (→ panic functions they branch to) |").unwrap();
    writeln!(r, "|---|---|---|---|---|").unwrap();
    for (opt, name, a) in audits {
        let reaching: Vec<String> = a
            .reaching
            .iter()
            .map(|(f, direct)| {
                if direct.is_empty() {
                    format!("`{f}`")
                } else {
                    format!(
                        "`{f}` → {}",
                        direct
                            .iter()
                            .map(|d| format!("`{d}`"))
                            .collect::<Vec<_>>()
                            .join(", ")
                    )
                }
            })
            .collect();
        writeln!(
            r,
            "| {opt} | {name} | {} | {} | {} |",
            if a.clean() { "pass" } else { "FAIL" },
            if a.handler { "yes" } else { "no (gc'd)" },
            if reaching.is_empty() {
                "none".into()
            } else {
                reaching.join("; ")
            }
        )
        .unwrap();
    }
    writeln!(r).unwrap();
    let mut generated: BTreeMap<String, BTreeSet<&str>> = BTreeMap::new();
    for (opt, _, a) in audits {
        for f in a.reaching.keys() {
            if f.starts_with("precast_firmware::codecs::") {
                generated
                    .entry(f.trim_start_matches("precast_firmware::").to_string())
                    .or_default()
                    .insert(opt);
            }
        }
    }
    let traps: BTreeSet<&String> = audits.iter().flat_map(|(_, _, a)| a.traps.iter()).collect();
    if traps.is_empty() {
        writeln!(
            r,
            "No function outside the start-up code holds an abort trap (`udf`).\n"
        )
        .unwrap();
    } else {
        let list: Vec<String> = traps.iter().map(|t| format!("`{t}`")).collect();
        writeln!(
            r,
            "Functions holding an abort trap (`udf`; not a panic, reported only): {}.\n",
            list.join(", ")
        )
        .unwrap();
    }
    if generated.is_empty() {
        writeln!(r, "No generated function keeps a panic path.\n").unwrap();
    } else {
        writeln!(r, "Generated functions that keep a panic path:\n").unwrap();
        for (f, opts) in &generated {
            writeln!(
                r,
                "- `{f}` (opt {})",
                opts.iter().copied().collect::<Vec<_>>().join(", ")
            )
            .unwrap();
        }
        writeln!(r).unwrap();
    }
}
