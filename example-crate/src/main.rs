//! One simulated day of the river-gauge network, sent through the generated codecs.
//!
//! Every gauge batches its day into one stream per codec, as the gateway would, and
//! each stream is checked to decode back exactly. The table compares the sizes with
//! the order-0 entropy of the day and with raw deflate on the same per-gauge data.

#![forbid(unsafe_code)]

use std::fmt::Display;
use std::process::ExitCode;

use miniz_oxide::deflate::core::{
    compress, create_comp_flags_from_zip_params, CompressionStrategy, CompressorOxide, TDEFLFlush,
    TDEFLStatus,
};
use precast_example::gauge_status::Symbol as Status;
use precast_example::{field_notes, gauge_status, level_delta};

const GAUGES: usize = 40;
/// One reading every 15 minutes.
const READINGS: usize = 96;
const SEED: u64 = 0x5eed_2417_0b0e_a7e5;
/// Gauges under the afternoon storm cell (gauge numbers).
const STORM_GAUGES: std::ops::RangeInclusive<usize> = 12..=27;
/// 13:00: the cell reaches the first storm gauge.
const STORM_START: usize = 52;
/// Readings of rain at each storm gauge.
const RAIN_LEN: usize = 12;
/// Readings the river keeps rising after the rain starts.
const RISE_LEN: usize = 18;

/// splitmix64: tiny, seedable, and good enough for a demo.
struct Rng(u64);

impl Rng {
    fn next(&mut self) -> u64 {
        self.0 = self.0.wrapping_add(0x9e37_79b9_7f4a_7c15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xbf58_476d_1ce4_e5b9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94d0_49bb_1331_11eb);
        z ^ (z >> 31)
    }

    fn unit(&mut self) -> f64 {
        (self.next() >> 11) as f64 / (1u64 << 53) as f64
    }

    fn chance(&mut self, p: f64) -> bool {
        self.unit() < p
    }

    fn below(&mut self, n: usize) -> usize {
        (self.next() % n as u64) as usize
    }

    fn pick<'a>(&mut self, items: &[&'a str]) -> &'a str {
        items[self.below(items.len())]
    }

    /// A signed step: zero with `p_zero`, else a geometric magnitude with ratio `r`.
    fn step(&mut self, p_zero: f64, r: f64, p_up: f64) -> i32 {
        if self.chance(p_zero) {
            return 0;
        }
        let mut m = 1;
        while m < 40 && self.chance(r) {
            m += 1;
        }
        if self.chance(p_up) {
            m
        } else {
            -m
        }
    }
}

#[derive(Clone, Copy, PartialEq, Eq)]
enum Note {
    Finding,
    Calibration,
    Routine,
}

struct Gauge {
    id: usize,
    level_mm: i32,
    high_water_mm: i32,
    alarm_mm: i32,
    battery_v: f64,
    /// Volts gained per reading in full sun.
    panel: f64,
    /// Headwater sites that freeze on clear nights.
    upland: bool,
    /// Loggers whose clock cell is failing.
    drifty: bool,
    /// Small tributaries that jump when the rain arrives.
    flashy: bool,
    storm_at: Option<usize>,
    reboot_pending: bool,
    last_alarm: Option<usize>,
    peak_mm: i32,
    saw_ice: bool,
    saw_fault: bool,
    retries: u32,
    status: Vec<Status>,
    deltas: Vec<u8>,
    notes: Vec<u8>,
}

impl Gauge {
    fn new(id: usize, rng: &mut Rng) -> Gauge {
        let storm = STORM_GAUGES.contains(&id);
        let level_mm = 300 + rng.below(1200) as i32;
        // After a wet week the storm gauges sit just under their marks.
        let gap = if storm {
            8 + rng.below(24) as i32
        } else {
            150 + rng.below(300) as i32
        };
        let poor_panel = id % 7 == 3;
        Gauge {
            id,
            level_mm,
            high_water_mm: level_mm + gap,
            alarm_mm: level_mm + gap + 20,
            battery_v: if poor_panel {
                11.9 + 0.1 * rng.unit()
            } else {
                12.1 + 0.7 * rng.unit()
            },
            panel: if poor_panel { 0.004 } else { 0.012 },
            upland: id <= 5,
            drifty: id % 9 == 4,
            flashy: id == 14 || id == 21,
            // The cell drifts downstream: one reading later every three gauges.
            storm_at: storm.then(|| STORM_START + (id - STORM_GAUGES.start()) / 3),
            reboot_pending: false,
            last_alarm: None,
            peak_mm: level_mm,
            saw_ice: false,
            saw_fault: false,
            retries: 0,
            status: Vec::with_capacity(READINGS),
            deltas: Vec::with_capacity(READINGS),
            notes: Vec::new(),
        }
    }

    fn raining(&self, r: usize) -> bool {
        self.storm_at
            .is_some_and(|s| (s..s + RAIN_LEN).contains(&r))
    }

    fn level_step(&mut self, r: usize, rng: &mut Rng) {
        // Calm steps follow the season's counts in codecs.toml.
        let mut d = match self.storm_at {
            Some(s) if (s..s + RISE_LEN).contains(&r) => rng.step(0.25, 0.5, 0.85),
            Some(s) if r >= s + RISE_LEN => rng.step(0.4, 0.4, 0.25),
            _ => rng.step(0.466, 0.363, 0.5),
        };
        if self.flashy && self.storm_at.is_some_and(|s| r == s + 2 || r == s + 3) {
            d += 12 + rng.below(10) as i32;
        }
        self.level_mm += d;
        self.peak_mm = self.peak_mm.max(self.level_mm);
        let zigzag = if d >= 0 { 2 * d } else { -2 * d - 1 };
        // 31 means "off the scale": the gateway asks for an absolute reading.
        self.deltas.push(zigzag.min(31) as u8);
    }

    fn battery_step(&mut self, r: usize) {
        let sun = if (27..=75).contains(&r) {
            (std::f64::consts::PI * (r - 27) as f64 / 48.0).sin()
        } else {
            0.0
        };
        let cloud = if self.raining(r) { 0.2 } else { 1.0 };
        self.battery_v += self.panel * sun * cloud - 0.004;
        self.battery_v = self.battery_v.min(13.0);
    }

    fn status_step(&mut self, r: usize, visiting: bool, rng: &mut Rng) -> Status {
        let above_alarm = self.level_mm > self.alarm_mm;
        let sun_up = (30..=72).contains(&r);
        let s = if self.reboot_pending {
            self.reboot_pending = false;
            Status::Reboot
        } else if above_alarm && self.last_alarm.is_none_or(|a| r >= a + 8) {
            self.last_alarm = Some(r);
            Status::FloodAlarm
        } else if rng.chance(0.0018) {
            self.saw_fault = true;
            self.reboot_pending = rng.chance(0.5);
            Status::SensorFault
        } else if self.upland && r < 30 && rng.chance(0.02) {
            self.saw_ice = true;
            Status::IceDetected
        } else if self.level_mm > self.high_water_mm && rng.chance(0.25) {
            Status::HighWater
        } else if self.storm_at.is_some_and(|s| r >= s + RISE_LEN) && rng.chance(0.004) {
            Status::DebrisAlert
        } else if visiting && rng.chance(0.5) {
            Status::Calibrating
        } else if self.drifty && r.is_multiple_of(4) && rng.chance(0.14) {
            Status::ClockDrift
        } else if rng.chance(if self.raining(r) { 0.25 } else { 0.017 }) {
            self.retries += 1;
            // Each retry is another transmission out of the battery.
            self.battery_v -= 0.003;
            Status::CommsRetry
        } else if self.battery_v < 11.95 && rng.chance(0.2) {
            Status::LowBattery
        } else if sun_up && self.battery_v < 12.6 && rng.chance(0.12) {
            Status::SolarCharging
        } else {
            Status::Ok
        };
        self.status.push(s);
        s
    }

    /// A technician's note on this gauge, from what it has been through today.
    fn note(&self, r: usize, kind: Note, rng: &mut Rng) -> String {
        let id = self.id;
        let m = f64::from(self.level_mm) / 1000.0;
        let time = format!("{:02}:{:02}", r / 4, r % 4 * 15);
        if kind == Note::Calibration {
            return format!(
                "calibration at gauge {id:02}: sensor zeroed at {:.3} bar, offset {} mm.",
                0.3 + 0.2 * rng.unit(),
                1 + rng.below(4)
            );
        }
        if kind == Note::Routine {
            return match rng.below(7) {
                0 => format!(
                    "gauge {id:02}: cleared leaves from the intake, reading steady at {m:.2} m."
                ),
                1 => format!(
                    "checked staff against logger at site {id:02}: {} mm apart, within tolerance.",
                    rng.below(4)
                ),
                2 => format!("swapped the desiccant at gauge {id:02}; case dry, seals good."),
                3 => format!("site {id:02} access gate jammed; climbed over, gate needs oil."),
                4 => format!("gauge {id:02} housing fine, spider webs cleared from the vent mesh."),
                5 => format!(
                    "sheep through the fence at site {id:02} again; post propped, farmer told."
                ),
                _ => format!(
                    "trimmed the willow shading the panel at gauge {id:02} (back to full sun)."
                ),
            };
        }
        if self.saw_ice {
            format!("ice in the stilling well at site {id:02} before dawn; heater working, well clear by {time}.")
        } else if self.saw_fault {
            format!(
                "sensor fault at gauge {id:02} earlier; {}.",
                rng.pick(&[
                    "reseated the cable plug, logger rebooted fine",
                    "no fault found on the wiring, will watch it",
                    "fuse was loose, refitted"
                ])
            )
        } else if self.level_mm > self.high_water_mm {
            format!("high water at site {id:02}: {m:.2} m on the staff at {time}, still rising.")
        } else if self.storm_at.is_some() && self.peak_mm > self.high_water_mm {
            format!("river falling at gauge {id:02}; peak mark on the post at {:.2} m, debris on the weir.", f64::from(self.peak_mm) / 1000.0)
        } else if self.retries > 2 {
            format!(
                "radio at gauge {id:02} retried {} times in the rain; antenna and cable look fine.",
                self.retries
            )
        } else if self.battery_v < 12.0 {
            format!(
                "battery at gauge {id:02} down to {:.1} v; {}.",
                self.battery_v,
                rng.pick(&[
                    "cleaned the panel, charging again",
                    "fitted a spare cell",
                    "panel needs turning to face south",
                    "left it, will check on friday"
                ])
            )
        } else if self.drifty {
            format!(
                "logger clock at gauge {id:02} {} s fast; synced to gps, clock cell is failing.",
                20 + rng.below(40)
            )
        } else {
            self.note(r, Note::Routine, rng)
        }
    }
}

/// Morning rounds: four technicians, four sites each; one goes to the storm sites later.
/// Returns (gauge, first reading on site); each visit lasts two readings.
fn visits(rng: &mut Rng) -> Vec<(usize, usize)> {
    let mut free: Vec<usize> = (1..=GAUGES).collect();
    let mut out = Vec::new();
    for tech in 0..4 {
        for stop in 0..4 {
            let id = free.swap_remove(rng.below(free.len()));
            // From 08:30, an hour per site: half on site, half driving.
            out.push((id, 34 + tech + stop * 4));
        }
    }
    let mut storm: Vec<usize> = STORM_GAUGES.collect();
    for stop in 0..4 {
        let id = storm.swap_remove(rng.below(storm.len()));
        out.push((id, 62 + stop * 4));
    }
    out
}

fn simulate() -> Vec<Gauge> {
    let mut rng = Rng(SEED);
    let mut gauges: Vec<Gauge> = (1..=GAUGES).map(|id| Gauge::new(id, &mut rng)).collect();
    let plan = visits(&mut rng);
    for r in 0..READINGS {
        for g in &mut gauges {
            let visit = plan
                .iter()
                .find(|&&(id, at)| id == g.id && (at..at + 2).contains(&r));
            g.level_step(r, &mut rng);
            g.battery_step(r);
            let s = g.status_step(r, visit.is_some(), &mut rng);
            // Findings on arrival; before leaving, the calibration or some upkeep.
            let kind = match visit {
                Some(&(_, at)) if at == r => Some(Note::Finding),
                Some(_) if s == Status::Calibrating => Some(Note::Calibration),
                Some(_) if rng.chance(0.6) => Some(Note::Routine),
                _ => None,
            };
            if let Some(kind) = kind {
                g.notes
                    .extend_from_slice(g.note(r, kind, &mut rng).as_bytes());
                g.notes.push(b'\n');
            }
        }
    }
    gauges
}

/// Order-0 entropy in bits per symbol.
fn entropy(data: impl Iterator<Item = u8>) -> f64 {
    let mut counts = [0u64; 256];
    let mut n = 0u64;
    for b in data {
        counts[usize::from(b)] += 1;
        n += 1;
    }
    counts
        .iter()
        .filter(|&&c| c > 0)
        .map(|&c| {
            let p = c as f64 / n as f64;
            -p * p.log2()
        })
        .sum()
}

fn deflate_huffman_only(data: &[u8]) -> Result<Vec<u8>, String> {
    // Negative window bits: raw deflate, no zlib wrapper.
    let flags = create_comp_flags_from_zip_params(6, -15, CompressionStrategy::HuffmanOnly as i32);
    let mut comp = CompressorOxide::new(flags);
    let mut out = vec![0u8; data.len() * 2 + 64];
    let (status, read, written) = compress(&mut comp, data, &mut out, TDEFLFlush::Finish);
    if status != TDEFLStatus::Done || read != data.len() {
        return Err(format!("huffman-only deflate stopped with {status:?}"));
    }
    out.truncate(written);
    Ok(out)
}

/// Compresses with deflate and checks it inflates back; returns the size.
fn deflate_checked(name: &str, data: &[u8], huffman_only: bool) -> Result<usize, String> {
    let packed = if huffman_only {
        deflate_huffman_only(data)?
    } else {
        miniz_oxide::deflate::compress_to_vec(data, 6)
    };
    let back = miniz_oxide::inflate::decompress_to_vec(&packed)
        .map_err(|e| format!("{name}: deflate stream does not inflate: {e:?}"))?;
    if back != data {
        return Err(format!("{name}: deflate round trip differs"));
    }
    Ok(packed.len())
}

struct Row {
    name: &'static str,
    streams: usize,
    symbols: usize,
    encoded: usize,
    headers: usize,
    /// The whole day as a single stream: the coding cost without per-stream overhead.
    one_stream: usize,
    entropy: f64,
    huffman: usize,
    deflate: usize,
}

struct Codec<S, E> {
    name: &'static str,
    encode: fn(&[S], &mut [u8]) -> Result<usize, E>,
    decode: fn(&[u8], &mut [S]) -> Result<usize, E>,
    max_len: fn(usize) -> usize,
    raw: fn(S) -> u8,
    blank: S,
}

/// Encodes, decodes and deflates every non-empty per-gauge stream of one codec.
fn run<S: Copy + PartialEq, E: Display>(c: &Codec<S, E>, streams: &[&[S]]) -> Result<Row, String> {
    let mut row = Row {
        name: c.name,
        streams: 0,
        symbols: 0,
        encoded: 0,
        headers: 0,
        one_stream: 0,
        entropy: 0.0,
        huffman: 0,
        deflate: 0,
    };
    let mut all = Vec::new();
    let mut whole = Vec::new();
    for (i, &input) in streams.iter().enumerate().filter(|(_, s)| !s.is_empty()) {
        let gauge = i + 1;
        let fail =
            |what: &str, e: &dyn Display| format!("{}, gauge {gauge:02}: {what}: {e}", c.name);
        let mut buf = vec![0u8; (c.max_len)(input.len())];
        let len = (c.encode)(input, &mut buf).map_err(|e| fail("encode failed", &e))?;
        let mut back = vec![c.blank; input.len()];
        let n = (c.decode)(&buf[..len], &mut back).map_err(|e| fail("decode failed", &e))?;
        if n != input.len() || back != input {
            return Err(fail(
                "round trip differs",
                &format!("{n} of {} symbols back", input.len()),
            ));
        }
        let raw: Vec<u8> = input.iter().map(|&s| (c.raw)(s)).collect();
        let label = format!("{}, gauge {gauge:02}", c.name);
        row.huffman += deflate_checked(&label, &raw, true)?;
        row.deflate += deflate_checked(&label, &raw, false)?;
        row.streams += 1;
        row.symbols += input.len();
        row.encoded += len;
        // Tag and fingerprint, then the symbol count as LEB128.
        row.headers += 3
            + (usize::BITS - input.len().leading_zeros())
                .max(1)
                .div_ceil(7) as usize;
        all.extend(raw);
        whole.extend_from_slice(input);
    }
    let mut buf = vec![0u8; (c.max_len)(whole.len())];
    let fail = |what: &str, e: &dyn Display| format!("{}, whole day: {what}: {e}", c.name);
    row.one_stream = (c.encode)(&whole, &mut buf).map_err(|e| fail("encode failed", &e))?;
    let mut back = vec![c.blank; whole.len()];
    (c.decode)(&buf[..row.one_stream], &mut back).map_err(|e| fail("decode failed", &e))?;
    if back != whole {
        return Err(fail("round trip differs", &"decoded symbols differ"));
    }
    row.entropy = entropy(all.into_iter());
    Ok(row)
}

fn bits_per(bytes: usize, symbols: usize) -> f64 {
    bytes as f64 * 8.0 / symbols as f64
}

fn print_row(name: &str, symbols: usize, encoded: usize, h: f64, huffman: usize, deflate: usize) {
    let bps = bits_per(encoded, symbols);
    println!(
        "{name:<13} {symbols:>7} {symbols:>6} {encoded:>9} {bps:>8.3} {h:>7.3} {:>8.1} {huffman:>11} {deflate:>11}",
        (bps - h) / h * 100.0
    );
}

fn report(gauges: &[Gauge]) -> Result<(), String> {
    let status: Vec<&[Status]> = gauges.iter().map(|g| g.status.as_slice()).collect();
    let deltas: Vec<&[u8]> = gauges.iter().map(|g| g.deltas.as_slice()).collect();
    let notes: Vec<&[u8]> = gauges.iter().map(|g| g.notes.as_slice()).collect();
    let rows = [
        run(
            &Codec {
                name: "gauge_status",
                encode: gauge_status::encode,
                decode: gauge_status::decode,
                max_len: gauge_status::max_encoded_len,
                raw: |s| s as u8,
                blank: Status::Ok,
            },
            &status,
        )?,
        run(
            &Codec {
                name: "level_delta",
                encode: level_delta::encode,
                decode: level_delta::decode,
                max_len: level_delta::max_encoded_len,
                raw: |b| b,
                blank: 0,
            },
            &deltas,
        )?,
        run(
            &Codec {
                name: "field_notes",
                encode: field_notes::encode,
                decode: field_notes::decode,
                max_len: field_notes::max_encoded_len,
                raw: |b| b,
                blank: b' ',
            },
            &notes,
        )?,
    ];

    let count = |s: Status| {
        status
            .iter()
            .flat_map(|g| g.iter())
            .filter(|&&x| x == s)
            .count()
    };
    let note_count = notes
        .iter()
        .flat_map(|n| n.iter())
        .filter(|&&b| b == b'\n')
        .count();
    println!(
        "precast demo: one day of {GAUGES} river gauges, a reading every 15 min ({READINGS} each)"
    );
    println!(
        "storm over gauges {:02}-{:02} from 13:00: {} high_water, {} flood_alarm, {} comms_retry; {note_count} note lines",
        STORM_GAUGES.start(),
        STORM_GAUGES.end(),
        count(Status::HighWater),
        count(Status::FloodAlarm),
        count(Status::CommsRetry)
    );
    let streams: Vec<String> = rows.iter().map(|r| r.streams.to_string()).collect();
    println!(
        "round trip exact for {} per-gauge streams, with precast and with both deflate settings",
        streams.join(" + ")
    );
    println!(
        "deflate: raw (no zlib wrapper) on the same per-gauge bytes, huffman-only and level 6"
    );
    println!();
    println!(
        "{:<13} {:>7} {:>6} {:>9} {:>8} {:>7} {:>8} {:>11} {:>11}",
        "codec",
        "symbols",
        "raw B",
        "encoded B",
        "bits/sym",
        "entropy",
        "excess %",
        "huff-only B",
        "deflate-6 B"
    );
    for r in &rows {
        print_row(
            r.name, r.symbols, r.encoded, r.entropy, r.huffman, r.deflate,
        );
    }
    let symbols: usize = rows.iter().map(|r| r.symbols).sum();
    // Each codec has its own alphabet, so the total entropy is the symbol-weighted mean.
    let h = rows
        .iter()
        .map(|r| r.entropy * r.symbols as f64)
        .sum::<f64>()
        / symbols as f64;
    print_row(
        "total",
        symbols,
        rows.iter().map(|r| r.encoded).sum(),
        h,
        rows.iter().map(|r| r.huffman).sum(),
        rows.iter().map(|r| r.deflate).sum(),
    );
    println!();
    for r in &rows {
        let bound = r.symbols as f64 * r.entropy / 8.0;
        let split = (r.encoded - r.one_stream) as f64 / r.streams.saturating_sub(1).max(1) as f64;
        println!(
            "{:<13} bound {bound:>5.0} B, ratio {:.3} | as one stream {:>5} B, {:.3} | +{split:.1} B/stream ({:.1} header)",
            r.name,
            r.encoded as f64 / bound,
            r.one_stream,
            r.one_stream as f64 / bound,
            r.headers as f64 / r.streams as f64
        );
    }
    println!("ratio: encoded / bound; per stream: header, final coder state (table bits), padding");
    Ok(())
}

fn main() -> ExitCode {
    let gauges = simulate();
    match report(&gauges) {
        Ok(()) => ExitCode::SUCCESS,
        Err(e) => {
            eprintln!("precast-example: {e}");
            ExitCode::FAILURE
        }
    }
}
