//! One simulated day of the river-gauge network, sent over the radio as it really runs.
//!
//! Every two hours each gauge sends one packet with its last eight readings (status and
//! water level, the levels as differences), and each note line a technician types goes out in a packet of its own.
//! Every frame in a packet is one compact stream of a generated codec. The gateway parses
//! each packet, sizes its buffers with `symbol_count`, decodes, and checks every frame
//! against what the gauge sent. The tables compare the bytes on air with the entropy of the
//! day, with raw bytes and with raw deflate on the same frames, and show what a frame costs
//! beyond its symbols.

#![forbid(unsafe_code)]

use std::fmt::Display;
use std::process::ExitCode;

use miniz_oxide::deflate::core::{
    compress, create_comp_flags_from_zip_params, CompressionStrategy, CompressorOxide, TDEFLFlush,
    TDEFLStatus,
};
use precast_example::gauge_status::Symbol as Status;
use precast_example::{field_notes, field_notes_order0, gauge_status, level_delta};

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
/// Readings in one packet: two hours. A storm rise here lasts four and a half hours
/// (`RISE_LEN`), so two-hourly packets still show it building, and every packet costs a
/// radio wake-up and preamble whatever it carries, so fewer, fuller packets save battery.
const PER_PACKET: usize = 8;
/// Reporting intervals in the day.
const INTERVALS: usize = READINGS / PER_PACKET;
/// Set in the interval byte of a packet that carries a note line.
const NOTE_FLAG: u8 = 0x80;
/// The longest note line the handheld accepts, in bytes.
const NOTE_MAX: usize = 160;
/// Bytes in front of the frames: gauge id, interval, status frame length.
const READING_HEADER: usize = 3;
/// Bytes in front of a note frame: gauge id, interval with `NOTE_FLAG`.
const NOTE_HEADER: usize = 2;
/// The largest reading packet, so the gauge can build it in a fixed buffer.
const READING_PACKET_MAX: usize = READING_HEADER
    + gauge_status::max_encoded_len(PER_PACKET)
    + level_delta::max_encoded_len(PER_PACKET);

// Ids, intervals and the status frame's length each fit their one byte.
const _: () = assert!(READINGS.is_multiple_of(PER_PACKET));
const _: () = assert!(GAUGES <= u8::MAX as usize && INTERVALS < NOTE_FLAG as usize);
const _: () = assert!(gauge_status::max_encoded_len(PER_PACKET) <= u8::MAX as usize);

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
    /// The level after each reading, in millimetres.
    levels: Vec<u16>,
    /// Note lines typed on site, with the reading they were typed at.
    notes: Vec<(usize, Vec<u8>)>,
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
            levels: Vec::with_capacity(READINGS),
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
        // A level off the gauge's scale is refused by the codec (`OutOfRange`), never cut.
        self.levels
            .push(u16::try_from(self.level_mm).unwrap_or(u16::MAX));
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
                let line = g.note(r, kind, &mut rng).into_bytes();
                g.notes.push((r, line));
            }
        }
    }
    gauges
}

/// Order-0 entropy in bits per symbol.
fn entropy(data: &[u8]) -> f64 {
    entropy_of(data.iter().map(|&b| i64::from(b)))
}

/// Order-0 entropy of the values, bits per value.
fn entropy_of(data: impl Iterator<Item = i64>) -> f64 {
    let mut counts = std::collections::BTreeMap::new();
    for v in data {
        *counts.entry(v).or_insert(0u64) += 1;
    }
    let n = counts.values().sum::<u64>() as f64;
    counts
        .values()
        .map(|&c| {
            let p = c as f64 / n;
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
fn deflate_checked(label: &str, data: &[u8], huffman_only: bool) -> Result<usize, String> {
    let packed = if huffman_only {
        deflate_huffman_only(data)?
    } else {
        miniz_oxide::deflate::compress_to_vec(data, 6)
    };
    let back = miniz_oxide::inflate::decompress_to_vec(&packed)
        .map_err(|e| format!("{label}: deflate stream does not inflate: {e:?}"))?;
    if back != data {
        return Err(format!("{label}: deflate round trip differs"));
    }
    Ok(packed.len())
}

/// A generated codec, through plain function pointers so one sender and one receiver serve
/// all three.
struct Codec<S, E> {
    name: &'static str,
    table_bits: u32,
    encode: fn(&[S], &mut [u8]) -> Result<usize, E>,
    decode: fn(&[u8], &mut [S]) -> Result<usize, E>,
    symbol_count: fn(&[u8]) -> Result<usize, E>,
    max_len: fn(usize) -> usize,
    /// The symbol's raw bytes (the baselines' input).
    raw: fn(S, &mut Vec<u8>),
    /// The order-0 entropy a symbol of `day` takes, bits.
    entropy: fn(&[S]) -> f64,
    blank: S,
}

const STATUS: Codec<Status, gauge_status::Error> = Codec {
    name: "gauge_status",
    table_bits: gauge_status::TABLE_BITS,
    encode: gauge_status::encode,
    decode: gauge_status::decode,
    symbol_count: gauge_status::symbol_count,
    max_len: gauge_status::max_encoded_len,
    raw: |s, out| out.push(s as u8),
    entropy: |day| entropy_of(day.iter().map(|&s| s as i64)),
    blank: Status::Ok,
};

const LEVEL: Codec<u16, level_delta::Error> = Codec {
    name: "level_delta",
    table_bits: level_delta::TABLE_BITS,
    encode: level_delta::encode,
    decode: level_delta::decode,
    symbol_count: level_delta::symbol_count,
    max_len: level_delta::max_encoded_len,
    raw: |v, out| out.extend(v.to_le_bytes()),
    // The coder sends differences: their entropy is the bound it aims at.
    entropy: |day| entropy_of(day.windows(2).map(|w| i64::from(w[1]) - i64::from(w[0]))),
    blank: 0,
};

/// The notes codec without contexts, for the comparison line only.
const NOTES_ORDER0: Codec<u8, field_notes_order0::Error> = Codec {
    name: "field_notes_order0",
    table_bits: field_notes_order0::TABLE_BITS,
    encode: field_notes_order0::encode,
    decode: field_notes_order0::decode,
    symbol_count: field_notes_order0::symbol_count,
    max_len: field_notes_order0::max_encoded_len,
    raw: |b, out| out.push(b),
    entropy: |day| entropy(day),
    blank: b' ',
};

const NOTES: Codec<u8, field_notes::Error> = Codec {
    name: "field_notes",
    table_bits: field_notes::TABLE_BITS,
    encode: field_notes::encode,
    decode: field_notes::decode,
    symbol_count: field_notes::symbol_count,
    max_len: field_notes::max_encoded_len,
    raw: |b, out| out.push(b),
    entropy: |day| entropy(day),
    blank: b' ',
};

/// One codec's frames over the day, and the same frames sent the baselines' ways.
struct Tally<S> {
    frames: usize,
    /// Bytes of the compact frames.
    precast: usize,
    /// Bytes of their compact headers.
    header: usize,
    /// Raw bytes of their symbols.
    raw: usize,
    huffman: usize,
    deflate: usize,
    /// Every symbol of the day, in the order sent.
    day: Vec<S>,
}

impl<S> Tally<S> {
    fn new() -> Self {
        Tally {
            frames: 0,
            precast: 0,
            header: 0,
            raw: 0,
            huffman: 0,
            deflate: 0,
            day: Vec::new(),
        }
    }
}

/// The gauge's side: encodes one compact frame, into `out`; returns its length. The
/// baselines compress the same symbols and are checked too.
fn send<S: Copy, E: Display>(
    c: &Codec<S, E>,
    symbols: &[S],
    out: &mut [u8],
    tally: &mut Tally<S>,
    label: &str,
) -> Result<usize, String> {
    let len =
        (c.encode)(symbols, out).map_err(|e| format!("{}, {label}: encode failed: {e}", c.name))?;
    let mut raw = Vec::new();
    for &s in symbols {
        (c.raw)(s, &mut raw);
    }
    tally.raw += raw.len();
    let label = format!("{}, {label}", c.name);
    tally.huffman += deflate_checked(&label, &raw, true)?;
    tally.deflate += deflate_checked(&label, &raw, false)?;
    tally.frames += 1;
    tally.precast += len;
    tally.header += compact_header_len(symbols.len());
    tally.day.extend_from_slice(symbols);
    Ok(len)
}

/// The compact header of an `n`-symbol frame: the check byte and the LEB128 count
/// (FORMAT.md).
fn compact_header_len(n: usize) -> usize {
    1 + (usize::BITS - n.leading_zeros()).div_ceil(7).max(1) as usize
}

/// The gateway's side: sizes the output with `symbol_count` (refusing more than `max`
/// symbols, so a damaged count cannot make it allocate) and decodes the frame.
fn receive<S: Copy, E: Display>(
    c: &Codec<S, E>,
    frame: &[u8],
    max: usize,
    label: &str,
) -> Result<Vec<S>, String> {
    let fail = |what: &str| format!("{}, {label}: {what}", c.name);
    let count = (c.symbol_count)(frame).map_err(|e| fail(&format!("bad frame header: {e}")))?;
    if count > max {
        return Err(fail(&format!(
            "frame claims {count} symbols, at most {max} allowed"
        )));
    }
    let mut out = vec![c.blank; count];
    let n = (c.decode)(frame, &mut out).map_err(|e| fail(&format!("decode failed: {e}")))?;
    if n != count {
        return Err(fail(&format!("decoded {n} of {count} symbols")));
    }
    Ok(out)
}

/// "hh:00-hh:00", the hours of a reporting interval.
fn hours(interval: usize) -> String {
    let h = interval * PER_PACKET / 4;
    format!("{h:02}:00-{:02}:00", h + PER_PACKET / 4)
}

/// Everything the gauges put on air in a day, in the order sent.
struct Air {
    packets: Vec<Vec<u8>>,
    status: Tally<Status>,
    level: Tally<u16>,
    notes: Tally<u8>,
}

/// The gauges' side. At the end of each interval every gauge sends a reading packet,
///
/// `[gauge id: u8][interval: u8][status frame length: u8][status frame][level frame]`,
///
/// then one note packet per line typed on site during the interval,
///
/// `[gauge id: u8][NOTE_FLAG | interval: u8][note frame]`.
///
/// Each frame is one compact stream, which runs to the end of the bytes its decoder is
/// given: so the status frame needs its length in front, and the last frame of a packet
/// takes the rest of it. Gauge ids start at 1; intervals at 0 (00:00-02:00).
fn transmit(gauges: &[Gauge]) -> Result<Air, String> {
    let mut air = Air {
        packets: Vec::new(),
        status: Tally::new(),
        level: Tally::new(),
        notes: Tally::new(),
    };
    for interval in 0..INTERVALS {
        let span = interval * PER_PACKET..(interval + 1) * PER_PACKET;
        for g in gauges {
            let label = format!("gauge {:02}, {}", g.id, hours(interval));
            // A fixed buffer, as on the gauge.
            let mut packet = [0u8; READING_PACKET_MAX];
            let (head, frames) = packet.split_at_mut(READING_HEADER);
            let status = &g.status[span.clone()];
            let s = send(&STATUS, status, frames, &mut air.status, &label)?;
            let (_, level_out) = frames.split_at_mut(s);
            let levels = &g.levels[span.clone()];
            let l = send(&LEVEL, levels, level_out, &mut air.level, &label)?;
            head[0] = g.id as u8;
            head[1] = interval as u8;
            head[2] = u8::try_from(s).map_err(|_| format!("{label}: status frame too long"))?;
            air.packets.push(packet[..READING_HEADER + s + l].to_vec());
            for (r, line) in &g.notes {
                if r / PER_PACKET != interval {
                    continue;
                }
                if line.len() > NOTE_MAX {
                    return Err(format!("{label}: note line over {NOTE_MAX} bytes"));
                }
                let mut packet = vec![0u8; NOTE_HEADER + (NOTES.max_len)(line.len())];
                let n = send(
                    &NOTES,
                    line,
                    &mut packet[NOTE_HEADER..],
                    &mut air.notes,
                    &label,
                )?;
                packet[0] = g.id as u8;
                packet[1] = NOTE_FLAG | interval as u8;
                packet.truncate(NOTE_HEADER + n);
                air.packets.push(packet);
            }
        }
    }
    Ok(air)
}

/// The gateway's side: parses and decodes every packet and checks each frame against what
/// the gauge sent. Returns the number of frames checked.
fn gateway(packets: &[Vec<u8>], gauges: &[Gauge]) -> Result<usize, String> {
    let mut readings = vec![[false; INTERVALS]; GAUGES];
    let mut notes = [0usize; GAUGES];
    let mut frames = 0;
    for (k, packet) in packets.iter().enumerate() {
        let &[id, tag, ref rest @ ..] = packet.as_slice() else {
            return Err(format!("packet {k}: shorter than its header"));
        };
        let Some(g) = usize::from(id).checked_sub(1).and_then(|i| gauges.get(i)) else {
            return Err(format!("packet {k}: unknown gauge id {id}"));
        };
        let interval = usize::from(tag & !NOTE_FLAG);
        if interval >= INTERVALS {
            return Err(format!("packet {k}: interval {interval} out of range"));
        }
        let label = format!("gauge {id:02}, {}", hours(interval));
        if tag & NOTE_FLAG != 0 {
            let line = receive(&NOTES, rest, NOTE_MAX, &label)?;
            let seen = &mut notes[g.id - 1];
            let sent = g.notes.get(*seen).map(|(r, line)| (r / PER_PACKET, line));
            if sent != Some((interval, &line)) {
                return Err(format!(
                    "field_notes, {label}: note {} differs from the line typed",
                    *seen + 1
                ));
            }
            *seen += 1;
            frames += 1;
            continue;
        }
        let Some((&len, rest)) = rest.split_first() else {
            return Err(format!("packet {k}: no status frame length"));
        };
        let Some((status, level)) = rest.split_at_checked(usize::from(len)) else {
            return Err(format!("packet {k}: status frame runs past the packet"));
        };
        let span = interval * PER_PACKET..(interval + 1) * PER_PACKET;
        if receive(&STATUS, status, PER_PACKET, &label)? != g.status[span.clone()] {
            return Err(format!("gauge_status, {label}: decoded statuses differ"));
        }
        if receive(&LEVEL, level, PER_PACKET, &label)? != g.levels[span] {
            return Err(format!("level_delta, {label}: decoded levels differ"));
        }
        let seen = &mut readings[g.id - 1][interval];
        if *seen {
            return Err(format!("{label}: a second reading packet"));
        }
        *seen = true;
        frames += 2;
    }
    for g in gauges {
        if let Some(i) = readings[g.id - 1].iter().position(|&seen| !seen) {
            return Err(format!(
                "gauge {:02}, {}: no reading packet",
                g.id,
                hours(i)
            ));
        }
        if notes[g.id - 1] != g.notes.len() {
            return Err(format!("gauge {:02}: note lines missing", g.id));
        }
    }
    Ok(frames)
}

/// One codec's line of the report.
struct Row {
    name: &'static str,
    table_bits: u32,
    frames: usize,
    symbols: usize,
    entropy: f64,
    /// Raw bytes of the symbols.
    raw: usize,
    /// Bytes of the compact headers of the frames.
    header: usize,
    /// Bytes in frames: precast, huffman-only deflate, deflate level 6.
    framed: [usize; 3],
    /// Bytes of the whole day as one stream, the same three ways.
    whole: [usize; 3],
}

impl Row {
    /// Bytes a frame costs beyond its symbols at the long-run rate:
    /// mean(frame bytes) - symbols a frame * rate / 8, which is (framed - whole) / frames.
    fn overhead(&self, i: usize) -> f64 {
        (self.framed[i] as f64 - self.whole[i] as f64) / self.frames as f64
    }

    fn rate(&self, i: usize) -> f64 {
        bits_per(self.whole[i], self.symbols)
    }
}

/// Sends the whole day of one codec as a single compact stream (and as single deflate
/// streams) for the long-run rates, checks it decodes back, and makes the codec's row.
fn row<S: Copy + PartialEq, E: Display>(c: &Codec<S, E>, t: &Tally<S>) -> Result<Row, String> {
    let mut stream = vec![0u8; (c.max_len)(t.day.len())];
    let len = (c.encode)(&t.day, &mut stream)
        .map_err(|e| format!("{}, whole day: encode failed: {e}", c.name))?;
    if receive(c, &stream[..len], t.day.len(), "whole day")? != t.day {
        return Err(format!("{}, whole day: round trip differs", c.name));
    }
    let mut raw = Vec::new();
    for &s in &t.day {
        (c.raw)(s, &mut raw);
    }
    let label = format!("{}, whole day", c.name);
    Ok(Row {
        name: c.name,
        table_bits: c.table_bits,
        frames: t.frames,
        symbols: t.day.len(),
        entropy: (c.entropy)(&t.day),
        raw: t.raw,
        header: t.header,
        framed: [t.precast, t.huffman, t.deflate],
        whole: [
            len,
            deflate_checked(&label, &raw, true)?,
            deflate_checked(&label, &raw, false)?,
        ],
    })
}

fn bits_per(bytes: usize, symbols: usize) -> f64 {
    bytes as f64 * 8.0 / symbols as f64
}

fn fixed(x: f64, digits: usize) -> String {
    format!("{x:.digits$}")
}

/// Bytes on air per codec against the entropy and the baselines.
fn print_frames(rows: &[Row]) {
    let line = |cells: [&dyn Display; 10]| {
        let [name, table, frames, symbols, h, precast, bps, raw, huffman, deflate] = cells;
        println!(
            "{name:<13} {table:>5} {frames:>6} {symbols:>7} {h:>7} | {precast:>9} {bps:>8} | {raw:>6} {huffman:>11} {deflate:>11}"
        );
    };
    line([
        &"codec",
        &"table",
        &"frames",
        &"symbols",
        &"entropy",
        &"precast B",
        &"bits/sym",
        &"raw B",
        &"huff-only B",
        &"deflate-6 B",
    ]);
    for r in rows {
        line([
            &r.name,
            &format!("2^{}", r.table_bits),
            &r.frames,
            &r.symbols,
            &fixed(r.entropy, 3),
            &r.framed[0],
            &fixed(bits_per(r.framed[0], r.symbols), 3),
            &r.raw,
            &r.framed[1],
            &r.framed[2],
        ]);
    }
    let sum = |f: fn(&Row) -> usize| rows.iter().map(f).sum::<usize>();
    line([
        &"all frames",
        &"",
        &sum(|r| r.frames),
        &sum(|r| r.symbols),
        &"",
        &sum(|r| r.framed[0]),
        &"",
        &sum(|r| r.raw),
        &sum(|r| r.framed[1]),
        &sum(|r| r.framed[2]),
    ]);
    println!("table: the codec's slots (2^TABLE_BITS), chosen by precast within its flash budget");
}

/// What a frame costs beyond its symbols, for precast and the baselines.
fn print_overhead(rows: &[Row]) {
    println!(
        "per-frame overhead, bytes: mean(frame bytes) - symbols a frame x long-run rate / 8;\n\
         long-run rate: the codec's whole day sent as one stream (one compact stream for\n\
         precast, one raw deflate stream for deflate), its header included\n"
    );
    println!(
        "{:<23} | {:<34} | {:<17} | deflate-6",
        "", "precast", "huff-only"
    );
    let line = |cells: [&dyn Display; 10]| {
        let [name, per, bytes, rate, over, header, h_rate, h_over, d_rate, d_over] = cells;
        println!(
            "{name:<13} {per:>9} | {bytes:>7} {rate:>8} {over:>8} {header:>8} | {h_rate:>8} {h_over:>8} | {d_rate:>8} {d_over:>8}"
        );
    };
    line([
        &"codec",
        &"sym/frame",
        &"B/frame",
        &"bits/sym",
        &"overhead",
        &"(header)",
        &"bits/sym",
        &"overhead",
        &"bits/sym",
        &"overhead",
    ]);
    for r in rows {
        line([
            &r.name,
            &fixed(r.symbols as f64 / r.frames as f64, 1),
            &fixed(r.framed[0] as f64 / r.frames as f64, 2),
            &fixed(r.rate(0), 3),
            &fixed(r.overhead(0), 2),
            &format!("({:.2})", r.header as f64 / r.frames as f64),
            &fixed(r.rate(1), 3),
            &fixed(r.overhead(1), 2),
            &fixed(r.rate(2), 3),
            &fixed(r.overhead(2), 2),
        ]);
    }
    println!(
        "(header): the compact header in the precast overhead (check byte, LEB128 count); the\n\
         rest is the coder's first state (table_bits bits, less the last symbol, which it holds)\n\
         and padding, less the trailing zeros left out. A deflate frame carries a block header,\n\
         its own code unless it takes the fixed one, and an end-of-block code; precast's tables\n\
         sit in flash at both ends of the link."
    );
}

fn report(gauges: &[Gauge]) -> Result<(), String> {
    let air = transmit(gauges)?;
    let checked = gateway(&air.packets, gauges)?;
    let rows = [
        row(&STATUS, &air.status)?,
        row(&LEVEL, &air.level)?,
        row(&NOTES, &air.notes)?,
    ];
    let count = |s: Status| {
        gauges
            .iter()
            .flat_map(|g| &g.status)
            .filter(|&&x| x == s)
            .count()
    };
    let reading_packets = GAUGES * INTERVALS;
    let note_packets = air.notes.frames;
    println!(
        "precast demo: one day of {GAUGES} river gauges, a reading every 15 min ({READINGS} each)"
    );
    println!(
        "storm over gauges {:02}-{:02} from 13:00: {} high_water, {} flood_alarm, {} comms_retry; {note_packets} note lines",
        STORM_GAUGES.start(),
        STORM_GAUGES.end(),
        count(Status::HighWater),
        count(Status::FloodAlarm),
        count(Status::CommsRetry)
    );
    println!(
        "radio: each gauge sends a packet every {} h ({PER_PACKET} readings: a status and a level frame), and one per note line",
        PER_PACKET / 4
    );
    println!(
        "gateway: {reading_packets} reading + {note_packets} note packets parsed; {checked} compact frames sized with symbol_count, decoded, all exact"
    );
    println!(
        "baselines on the same frames, each round-tripped: raw (1 byte a symbol, 2 a level), raw deflate (no wrapper) huffman-only and level 6"
    );
    println!();
    print_frames(&rows);
    println!();
    print_overhead(&rows);

    // The notes again, each line a frame, through the same codec with one table set.
    let mut plain = 0usize;
    for (_, line) in gauges.iter().flat_map(|g| &g.notes) {
        let mut frame = vec![0u8; (NOTES_ORDER0.max_len)(line.len())];
        let n = (NOTES_ORDER0.encode)(line, &mut frame)
            .map_err(|e| format!("field_notes_order0: encode failed: {e}"))?;
        if receive(&NOTES_ORDER0, &frame[..n], NOTE_MAX, "comparison")? != *line {
            return Err("field_notes_order0: a note line differs".to_string());
        }
        plain += n;
    }
    let notes = &rows[2];
    println!();
    println!(
        "contexts: field_notes codes each character with one of {} table sets, chosen by the character before it; with one set (2^{} slots) the same {} note frames take {plain} B, {:.1} % more than its {} B",
        field_notes::SETS,
        NOTES_ORDER0.table_bits,
        notes.frames,
        100.0 * (plain as f64 - notes.framed[0] as f64) / notes.framed[0] as f64,
        notes.framed[0]
    );

    // The same packets with each frame sent another way; the packet headers stay.
    let framed = [0, 1, 2].map(|i| rows.iter().map(|r| r.framed[i]).sum::<usize>());
    let raw: usize = rows.iter().map(|r| r.raw).sum();
    let on_air: usize = air.packets.iter().map(Vec::len).sum();
    let packet_headers = reading_packets * READING_HEADER + note_packets * NOTE_HEADER;
    if on_air != packet_headers + framed[0] {
        return Err(format!(
            "packets hold {on_air} B, not {packet_headers} B of packet headers and {} B of frames",
            framed[0]
        ));
    }
    println!();
    println!(
        "packets on air for the day: {on_air} B with precast frames ({packet_headers} B of it packet headers), {:.0} % of raw",
        100.0 * on_air as f64 / (packet_headers + raw) as f64
    );
    println!(
        "the same packets with raw frames {} B, huffman-only {} B, deflate-6 {} B (the radio's own preamble, sync and CRC not counted)",
        packet_headers + raw,
        packet_headers + framed[1],
        packet_headers + framed[2]
    );
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
