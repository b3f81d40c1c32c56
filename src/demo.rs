//! The demo tankhouse: an invented plant ("Vega Refinery") with weeks of
//! believable history, generated from a seed and entered through the plant API.
//!
//! Everything goes in the way a foreman's data would: the current log as a CSV
//! import, then every shift's entries in time order, each checked like any
//! other entry. Nothing here is a real plant's data; the figures sit inside the
//! typical ranges of DOMAIN.md.

use chrono::{Datelike, Duration, Timelike};
use std::fmt::Write as _;

use crate::domain::anode::AnodeLoad;
use crate::domain::cathode::Cathodes;
use crate::domain::charge::{MemoryCurve, OpenSpan, RawReading, Span, Time, cell_charge};
use crate::domain::electrochem::ECE_KG_PER_AH;
use crate::domain::entry::Entry;
use crate::plant::{Opts, Plant, PlantError, Result};

/// How big a demo to build.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct DemoSpec {
    /// Cells in all (refining and liberator).
    pub cells: usize,
    pub days: u32,
    pub seed: u64,
    /// Minutes between rectifier readings.
    pub reading_minutes: u32,
}

impl Default for DemoSpec {
    fn default() -> Self {
        DemoSpec { cells: 102, days: 60, seed: 7, reading_minutes: 15 }
    }
}

/// Entries recorded per write: the default demo's 8 617 go in as one batch;
/// a plant-scale demo goes in batch after batch, each its own transaction,
/// so the pending entries are never all built as `Entry` values at once.
const ENTRIES_PER_BATCH: usize = 50_000;

/// The readings the demo's own weighings are computed from: every reading on a
/// 15-minute mark (at the default, every reading), so a year of minute readings
/// is not kept in memory.
const CURVE_MINUTES: i64 = 15;

/// What the demo wrote.
#[derive(Debug, Clone, PartialEq)]
pub struct DemoSummary {
    pub circuits: usize,
    pub cells: usize,
    pub readings: usize,
    pub entries: usize,
    pub from: Time,
    pub to: Time,
}

/// The demo plant's name (kept in the plant layer, which skips the demo's backups).
pub use crate::plant::DEMO_NAME;

/// SplitMix64: small, fast and the same on every machine, which is all a demo needs.
struct Rng(u64);

impl Rng {
    fn new(seed: u64, stream: u64) -> Rng {
        let mut r = Rng(seed ^ stream.wrapping_mul(0x9E37_79B9_7F4A_7C15));
        r.next();
        r
    }
    fn next(&mut self) -> u64 {
        self.0 = self.0.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        z ^ (z >> 31)
    }
    /// Uniform in [0, 1).
    fn unit(&mut self) -> f64 {
        (self.next() >> 11) as f64 / (1u64 << 53) as f64
    }
    /// Roughly normal (sum of uniforms), mean 0, deviation 1.
    fn normal(&mut self) -> f64 {
        (0..6).map(|_| self.unit()).sum::<f64>() * std::f64::consts::SQRT_2 - 6.0 * std::f64::consts::FRAC_1_SQRT_2
    }
}

/// A circuit design of the demo plant.
struct CircuitDesign {
    name: String,
    amps: f64,
    anodes: u32,
    anode_kg: f64,
    sections: Vec<(String, usize, bool)>,
}

const FOREMEN: [&str; 4] = ["AK", "BM", "CR", "DT"];
const CREW_CELLS: usize = 8;
const LIBERATOR_ANODES: u32 = 40;
const LIBERATOR_EFFICIENCY: f64 = 0.78;
const LIBERATOR_CROP_DAYS: f64 = 7.0;

fn section_name(i: usize) -> String {
    let letters = b"ABCDEFGHJKMNPQRSTUVWXYZ";
    let n = letters.len();
    if i < n { (letters[i] as char).to_string() } else { format!("{}{}", letters[i / n - 1] as char, letters[i % n] as char) }
}

fn designs(spec: &DemoSpec) -> Vec<CircuitDesign> {
    let liberators = (spec.cells / 17).clamp(4, 60);
    let refining = spec.cells.saturating_sub(liberators).max(2);
    let n_circuits = refining.div_ceil(300).max(2);
    let mut out = Vec::new();
    let mut sec = 0;
    for c in 0..n_circuits {
        let cells = refining / n_circuits + usize::from(c < refining % n_circuits);
        let n_sections = cells.div_ceil(30).max(2);
        let mut sections = Vec::new();
        for s in 0..n_sections {
            let k = cells / n_sections + usize::from(s < cells % n_sections);
            sections.push((section_name(sec), k, false));
            sec += 1;
        }
        // Two designs alternate: 50 anodes of 380 kg at 30.5 kA (305 A/m²), 48 of 370 kg at 28 kA (292 A/m²).
        let (amps, anodes, anode_kg) = if c % 2 == 0 { (30_500.0, 50, 380.0) } else { (28_000.0, 48, 370.0) };
        out.push(CircuitDesign { name: format!("R{}", c + 1), amps, anodes, anode_kg, sections });
    }
    if let Some(last) = out.last_mut() {
        last.sections.push(("L".to_string(), liberators, true));
    }
    out
}

/// Hours of anode life to the scrap target at the design current (η_a 1, w_Cu 0.995).
fn life_hours(d: &CircuitDesign) -> f64 {
    let load = AnodeLoad { initial_kg: d.anode_kg, count: d.anodes, efficiency: 1.0, copper_fraction: 0.995, lug_kg: 20.0 };
    load.charge_to_fraction_ah(0.15).unwrap_or(0.0) / d.amps
}

/// The demo layout file.
pub fn layout_text(spec: &DemoSpec) -> String {
    let mut s = String::new();
    let _ = writeln!(s, "# {DEMO_NAME}: an invented tankhouse for trying tankbook. Not a real plant's data.");
    let _ = writeln!(s, "[plant]\nname = \"{DEMO_NAME}\"\ntime_zone = \"Europe/Madrid\"\nday_starts_at = \"06:00\"\n");
    let _ = writeln!(s, "[defaults]\nface_area_m2 = 1.0\nscrap_target = 0.15\nscrap_upper = 0.25\nscrap_lower = 0.10");
    let _ = writeln!(s, "cathode_efficiency = 0.96\nanode_efficiency = 1.0\nanode_copper_fraction = 0.995\nlug_kg = 20.0");
    let _ = writeln!(s, "thin_anode_mm = 3.0\nlow_efficiency_below = 0.90\ncrops_per_anode_cycle = 3\n");
    let _ = writeln!(s, "[plan]\ncrew_cells_per_day = {CREW_CELLS}\nshifts_per_day = 2\nearly_weight = 1.0\nlate_weight = 3.0\n");
    for d in designs(spec) {
        let life = life_hours(&d);
        let cath = Cathodes { count: d.anodes + 1, anodes: d.anodes, efficiency: 0.96 };
        let target = cath.mean_kg(d.amps * life / 3.0).round();
        let _ = writeln!(s, "[[circuit]]\nname = \"{}\"\nmax_amps = {}\n", d.name, d.amps * 1.2);
        for (name, n, inert) in &d.sections {
            let _ = writeln!(s, "[[circuit.section]]\nname = \"{name}\"\ncells = {n}");
            if *inert {
                let lib = Cathodes { count: LIBERATOR_ANODES + 1, anodes: LIBERATOR_ANODES, efficiency: LIBERATOR_EFFICIENCY };
                let t = lib.mean_kg(d.amps * LIBERATOR_CROP_DAYS * 24.0).round();
                let _ = writeln!(
                    s,
                    "anode_kind = \"inert\"\nanodes_per_cell = {LIBERATOR_ANODES}\ncathodes_per_cell = {}\nnew_anode_kg = 250.0\ncathode_efficiency = {LIBERATOR_EFFICIENCY}\nlow_efficiency_below = 0.70\ncathode_target_kg = {t}\n",
                    LIBERATOR_ANODES + 1
                );
            } else {
                let _ = writeln!(
                    s,
                    "anodes_per_cell = {}\ncathodes_per_cell = {}\nnew_anode_kg = {}\ncathode_target_kg = {target}\n",
                    d.anodes,
                    d.anodes + 1,
                    d.anode_kg
                );
            }
        }
    }
    s
}

/// One cell's generated shift work.
struct CellPlan {
    cell: String,
    circuit: usize,
    inert: bool,
    events: Vec<(Time, Work)>,
    cutouts: Vec<OpenSpan>,
}

#[derive(Clone, Copy)]
enum Work {
    Anodes { count: u32, mean_kg: f64 },
    Harvest,
    Scrap,
    Cutout { hours: f64 },
    Shorts(u32),
    Voltage(f64),
}

/// Rounds to the next shift's working hour (07:00, 15:00, 23:00 UTC).
fn to_slot(t: Time) -> Time {
    let base = t.date_naive().and_hms_opt(7, 0, 0).map(|d| d.and_utc()).unwrap_or(t);
    let mut s = base - Duration::hours(8);
    while s < t {
        s += Duration::hours(8);
    }
    s
}

fn foreman(t: Time) -> &'static str {
    let shift = (t.hour() as usize + 2) / 8;
    FOREMEN[(t.ordinal() as usize * 3 + shift) % FOREMEN.len()]
}

/// The demo's current log as CSV, generated line by line as the import reads
/// it (a year of minute readings is never one string), keeping the readings on
/// the curve's marks for the weighings.
struct CurrentLog<'a> {
    designs: &'a [CircuitDesign],
    outages: &'a [Vec<Span>],
    /// The unexplained gap in the first circuit's readings (ends excluded).
    gap: Span,
    start: Time,
    now: Time,
    step: Duration,
    rng: Rng,
    circuit: usize,
    t: Time,
    header: bool,
    buf: Vec<u8>,
    pos: usize,
    curve: Vec<Vec<RawReading>>,
}

impl CurrentLog<'_> {
    /// Writes the next lines into the buffer; false at the end of the log.
    fn fill(&mut self) -> bool {
        use std::io::Write as _;
        self.buf.clear();
        self.pos = 0;
        if std::mem::take(&mut self.header) {
            self.buf.extend_from_slice(b"time,circuit,amps\n");
        }
        while self.buf.len() < 1 << 15 {
            let Some(d) = self.designs.get(self.circuit) else { break };
            if self.t > self.now {
                self.circuit += 1;
                self.t = self.start;
                continue;
            }
            let t = self.t;
            self.t += self.step;
            let in_outage = self.outages[self.circuit].iter().any(|o| o.from <= t && t < o.to);
            let in_gap = self.circuit == 0 && t > self.gap.from && t < self.gap.to;
            if in_gap {
                continue;
            }
            let minutes = (t - self.start).num_minutes();
            let h = minutes as f64 / 60.0;
            let ripple = 0.005 * (std::f64::consts::TAU * h / 24.0).sin() + 0.003 * self.rng.normal();
            let amps = if in_outage { 0.0 } else { (d.amps * (1.0 + ripple)).round() };
            let _ = writeln!(self.buf, "{},{},{amps}", t.format("%Y-%m-%dT%H:%M:%SZ"), d.name);
            if minutes % CURVE_MINUTES == 0 || self.step > Duration::minutes(CURVE_MINUTES) {
                self.curve[self.circuit].push(RawReading { t, amps });
            }
        }
        !self.buf.is_empty()
    }
}

impl std::io::Read for CurrentLog<'_> {
    fn read(&mut self, out: &mut [u8]) -> std::io::Result<usize> {
        if self.pos == self.buf.len() && !self.fill() {
            return Ok(0);
        }
        let n = out.len().min(self.buf.len() - self.pos);
        out[..n].copy_from_slice(&self.buf[self.pos..self.pos + n]);
        self.pos += n;
        Ok(n)
    }
}

/// Writes the demo plant into `plant` (which should be empty), ending at `now`.
pub fn build(plant: &mut Plant, spec: &DemoSpec, now: Time) -> Result<DemoSummary> {
    let designs = designs(spec);
    let start = to_slot(now - Duration::days(i64::from(spec.days))) - Duration::hours(8);
    plant.load_layout(&layout_text(spec), "demo layout", start)?;

    // The current log: 15-minute readings with ripple, two outages and one unexplained gap.
    let mut outages: Vec<Vec<Span>> = vec![Vec::new(); designs.len()];
    let day = |f: f64| start + Duration::minutes((f * f64::from(spec.days) * 1440.0) as i64);
    let o1 = to_slot(day(0.3)) - Duration::hours(7) + Duration::minutes(130);
    outages[0].push(Span { from: o1, to: o1 + Duration::minutes(210) });
    let o2 = to_slot(day(0.78)) - Duration::hours(3);
    if designs.len() > 1 {
        outages[1].push(Span { from: o2, to: o2 + Duration::minutes(135) });
    }
    let gap = Span { from: to_slot(day(0.55)) + Duration::hours(2), to: to_slot(day(0.55)) + Duration::hours(6) };
    let mut log = CurrentLog {
        designs: &designs,
        outages: &outages,
        gap,
        start,
        now,
        step: Duration::minutes(i64::from(spec.reading_minutes.max(1))),
        rng: Rng::new(spec.seed, 1),
        circuit: 0,
        t: start,
        header: true,
        buf: Vec::new(),
        pos: 0,
        curve: vec![Vec::new(); designs.len()],
    };
    let imported = plant.import_current(&mut log, "demo current log", start)?;
    let readings = std::mem::take(&mut log.curve);
    let opts = |t: Time, force: bool| Opts { by: foreman(t).to_string(), force, now: t.max(start) };
    let mut circuit_entries = Vec::new();
    for (ci, d) in designs.iter().enumerate() {
        for o in &outages[ci] {
            circuit_entries.push((Entry::Outage { circuit: d.name.clone(), from: o.from, to: o.to }, opts(o.to, false)));
        }
    }
    // Planned ahead: an outage on R1 in five days, a lower current on R2 from the day after tomorrow.
    let planned = to_slot(now + Duration::days(5));
    circuit_entries
        .push((Entry::Outage { circuit: designs[0].name.clone(), from: planned, to: planned + Duration::hours(4) }, opts(now, false)));
    outages[0].push(Span { from: planned, to: planned + Duration::hours(4) });
    if designs.len() > 1 {
        let amps = designs[1].amps - 1_000.0;
        circuit_entries
            .push((Entry::Setpoint { circuit: designs[1].name.clone(), from: to_slot(now + Duration::days(2)), amps }, opts(now, false)));
    }
    plant.record_batch(&circuit_entries)?;
    let curves: Vec<MemoryCurve> = readings.iter().zip(&outages).map(|(r, o)| MemoryCurve::build(r, o, &[], now)).collect();

    // Entries are kept compact (a cell's number, not its name) until their batch is recorded.
    let mut names: Vec<String> = Vec::new();
    // every entry lies between the start and now, at most 1 100 days apart (the --days limit)
    let since = |t: Time| u32::try_from((t - start).num_seconds()).unwrap_or(u32::MAX);
    let mut entries: Vec<Pending> = Vec::new();
    let mut last_inert = None;
    plan_cells(&designs, spec, start, now, &mut |mut p: CellPlan| {
        let i = names.len();
        let cell = i as u32;
        if p.inert {
            last_inert = Some(cell);
        }
        let mut push = |at: Time, done: Done| entries.push(Pending { at: since(at), cell, done });
        let mut rng = Rng::new(spec.seed, 1000 + i as u64);
        let inert = p.inert;
        let shorted = !inert && rng.unit() < 0.05;
        let eta = if inert {
            LIBERATOR_EFFICIENCY + 0.02 * rng.normal()
        } else if shorted {
            0.875 + 0.008 * rng.normal()
        } else {
            0.962 + 0.006 * rng.normal()
        };
        let curve = &curves[p.circuit];
        let mut crop_start: Option<Time> = None;
        let mut load: Option<(Time, u32, f64)> = None;
        p.events.sort_by_key(|(t, w)| (*t, rank(w)));
        for &(t, w) in &p.events {
            let done = match w {
                Work::Anodes { count, mean_kg } => {
                    load = Some((t, count, mean_kg));
                    if crop_start.is_none() {
                        crop_start = Some(t);
                    }
                    // whole kilograms, tens of anodes: both fit 16 bits
                    Done::Anodes { count: count as u16, mean_kg: mean_kg as u16 }
                }
                Work::Harvest => {
                    let Some(s) = crop_start else { continue };
                    let q = cell_charge(curve, &p.cutouts, s, t).unwrap_or_else(|e| match e {}).total();
                    // weighing scatter, never above what the charge can plate
                    let kg = (ECE_KG_PER_AH * q * (eta * (1.0 + 0.012 * rng.normal())).min(0.985)).round();
                    // the next crop starts while anodes are in; an anode change's scrap came just before
                    crop_start = load.map(|_| t);
                    Done::Harvest(kg as i32)
                }
                Work::Scrap => {
                    let Some((set, count, mean)) = load.take() else { continue };
                    let q = cell_charge(curve, &p.cutouts, set, t).unwrap_or_else(|e| match e {}).total();
                    let a =
                        AnodeLoad { initial_kg: mean, count, efficiency: (eta / 0.962).min(1.01), copper_fraction: 0.995, lug_kg: 20.0 };
                    Done::Scrap((a.remaining_kg(q) * f64::from(count) * (1.0 + 0.015 * rng.normal())).round() as i32)
                }
                Work::Cutout { hours } => {
                    let to = t + Duration::minutes((hours * 60.0) as i64);
                    Done::Cutout(if to <= now { since(to) } else { STILL_OUT })
                }
                Work::Shorts(n) => Done::Shorts(if shorted { n + 2 } else { n }),
                Work::Voltage(v) => {
                    let v = if inert {
                        2.05 + 0.04 * rng.normal()
                    } else if shorted {
                        0.21 + 0.015 * rng.normal()
                    } else {
                        v + 0.008 * rng.normal()
                    };
                    Done::Voltage((v * 1000.0).round() as i32)
                }
            };
            push(t, done);
        }
        if shorted {
            // shorts found and cleared every few days in the cells that have them
            let mut t = start + Duration::hours(30 + (rng.unit() * 40.0) as i64);
            while t < now {
                push(to_slot(t), Done::FoundShorts(2 + (rng.unit() * 4.0) as u32));
                t += Duration::hours(50 + (rng.unit() * 30.0) as i64);
            }
        }
        names.push(std::mem::take(&mut p.cell));
    });
    // One liberator cell's last voltage reads too low for an inert-anode cell: a short or a bad reading.
    if let Some(cell) = last_inert {
        entries.push(Pending { at: since(now), cell, done: Done::ForcedVoltage(620) });
    }
    // time order; ties in the order generated (a stable sort)
    entries.sort_by_key(|p| (p.at, p.done.rank()));
    let n = entries.len() + circuit_entries.len();
    for chunk in entries.chunks(ENTRIES_PER_BATCH) {
        let batch: Vec<(Entry, Opts)> = chunk.iter().map(|p| p.entry(&names[p.cell as usize], start, opts)).collect();
        plant.record_batch(&batch)?;
    }
    Ok(DemoSummary { circuits: designs.len(), cells: names.len(), readings: imported.added, entries: n, from: start, to: now })
}

/// An entry waiting for its batch: what the demo generated, without the cell's
/// name, its times in seconds after the demo's start (16 bytes an entry: a
/// plant-scale demo holds one and a half million).
struct Pending {
    at: u32,
    cell: u32,
    done: Done,
}

/// A cut-out's end that means it is still open.
const STILL_OUT: u32 = u32::MAX;

/// What an entry records, in whole kilograms and millivolts (what the demo
/// rounds its figures to), so each fits 32 bits.
#[derive(Clone, Copy)]
enum Done {
    Anodes {
        count: u16,
        mean_kg: u16,
    },
    Harvest(i32),
    Scrap(i32),
    /// A cut-out from the entry's time to this end ([`STILL_OUT`]: still out).
    Cutout(u32),
    Shorts(u32),
    /// Shorts found on a patrol of a shorted cell (after the shift's voltages).
    FoundShorts(u32),
    Voltage(i32),
    /// A voltage recorded although its check questions it.
    ForcedVoltage(i32),
}

impl Done {
    /// The order of entries at the same time: [`rank`]'s, the patrols' shorts with
    /// the voltages, the questioned voltage last.
    fn rank(&self) -> u8 {
        match self {
            Done::Scrap(_) => 0,
            Done::Harvest(_) => 1,
            Done::Anodes { .. } => 2,
            Done::Cutout(_) => 3,
            Done::Shorts(_) => 4,
            Done::FoundShorts(_) | Done::Voltage(_) => 5,
            Done::ForcedVoltage(_) => 6,
        }
    }
}

impl Pending {
    fn entry(&self, cell: &str, start: Time, opts: impl Fn(Time, bool) -> Opts) -> (Entry, Opts) {
        let time = |s: u32| start + Duration::seconds(i64::from(s));
        let (cell, at) = (cell.to_string(), time(self.at));
        let entry = match self.done {
            Done::Anodes { count, mean_kg } => Entry::Anodes { cell, at, count: u32::from(count), mean_kg: f64::from(mean_kg) },
            Done::Harvest(kg) => Entry::Harvest { cell, at, total_kg: f64::from(kg) },
            Done::Scrap(kg) => Entry::Scrap { cell, at, total_kg: f64::from(kg) },
            Done::Cutout(to) => Entry::Cutout { cell, from: at, to: (to != STILL_OUT).then(|| time(to)) },
            Done::Shorts(count) | Done::FoundShorts(count) => Entry::Shorts { cell, at, count },
            // m / 1000 is the double nearest the rounded volts, as (v * 1000).round() / 1000 was
            Done::Voltage(mv) | Done::ForcedVoltage(mv) => Entry::Voltage { cell, at, volts: f64::from(mv) / 1000.0 },
        };
        (entry, opts(at, matches!(self.done, Done::ForcedVoltage(_))))
    }
}

fn rank(w: &Work) -> u8 {
    match w {
        Work::Scrap => 0,
        Work::Harvest => 1,
        Work::Anodes { .. } => 2,
        Work::Cutout { .. } => 3,
        Work::Shorts(_) => 4,
        Work::Voltage(_) => 5,
    }
}

/// Each cell's anode changes (in crew-sized waves), harvests, cut-outs and readings.
fn plan_cells(designs: &[CircuitDesign], spec: &DemoSpec, start: Time, now: Time, each: &mut dyn FnMut(CellPlan)) {
    let mut made = 0;
    for (ci, d) in designs.iter().enumerate() {
        let life = life_hours(d);
        let refining: usize = d.sections.iter().filter(|s| !s.2).map(|s| s.1).sum();
        let groups = refining.div_ceil(CREW_CELLS).max(1);
        let mut k = 0;
        for (name, n, inert) in &d.sections {
            for j in 0..*n {
                let cell = format!("{name}{:0w$}", j + 1, w = n.to_string().len().max(2));
                let mut rng = Rng::new(spec.seed, 100_000 + (ci * 10_000 + k) as u64);
                let mut p = CellPlan { cell, circuit: ci, inert: *inert, events: Vec::new(), cutouts: Vec::new() };
                let cut = |p: &mut CellPlan, t: Time, hours: f64| {
                    p.events.push((t, Work::Cutout { hours }));
                    let to = t + Duration::minutes((hours * 60.0) as i64);
                    p.cutouts.push(OpenSpan { from: t, to: (to <= now).then_some(to) });
                };
                if *inert {
                    let set = to_slot(start + Duration::hours((rng.unit() * 20.0) as i64));
                    p.events.push((set, Work::Anodes { count: LIBERATOR_ANODES, mean_kg: 250.0 }));
                    let mut t = set + Duration::hours((LIBERATOR_CROP_DAYS * 24.0 * (0.3 + 0.7 * rng.unit())) as i64);
                    while to_slot(t) < now {
                        let h = to_slot(t);
                        p.events.push((h, Work::Harvest));
                        cut(&mut p, h, 1.5);
                        t += Duration::hours((LIBERATOR_CROP_DAYS * 24.0) as i64);
                    }
                } else {
                    let group = k / CREW_CELLS;
                    let phase = (group as f64 + 0.5) / groups as f64;
                    let mut set = to_slot(start + Duration::minutes((phase * life * 60.0) as i64));
                    let mut first = true;
                    while set < now {
                        let mean_kg = (d.anode_kg + 4.0 * rng.normal()).round();
                        if !first {
                            p.events.push((set, Work::Scrap));
                            p.events.push((set, Work::Harvest));
                        }
                        p.events.push((set, Work::Anodes { count: d.anodes, mean_kg }));
                        cut(&mut p, set, 3.0);
                        first = false;
                        for c in 1..3 {
                            let h = to_slot(set + Duration::minutes((life * 60.0 * f64::from(c) / 3.0 + 180.0 * rng.normal()) as i64));
                            if h < now && h > set {
                                p.events.push((h, Work::Harvest));
                                cut(&mut p, h, 1.5);
                            }
                        }
                        // crews run a little late or early around the ideal day
                        let slip = Duration::minutes((life * 60.0 + 360.0 * rng.normal()) as i64);
                        set = to_slot(set + slip);
                    }
                    k += 1;
                }
                let mut t = to_slot(start) + Duration::hours(3);
                while t < now {
                    let v = 0.29 + 0.02 * rng.unit();
                    p.events.push((t, Work::Voltage(v)));
                    if rng.unit() < 0.02 {
                        p.events.push((t, Work::Shorts(1)));
                    }
                    t += Duration::days(1);
                }
                if made == 5 {
                    out_for_repair(&mut p, now);
                }
                made += 1;
                each(p);
            }
        }
    }
}

/// One cell is out for a bus-bar repair right now (open cut-out).
fn out_for_repair(p: &mut CellPlan, now: Time) {
    let t = to_slot(now - Duration::hours(20));
    // the cell is out: no harvest or anode work after the cut-out begins
    let busy = |w: &Work| !matches!(w, Work::Voltage(_) | Work::Shorts(_));
    let clear = |c: &OpenSpan| c.to.is_some_and(|to| to < t);
    if p.cutouts.iter().all(|c| c.from >= t - Duration::hours(1) || clear(c)) {
        p.events.retain(|(at, w)| *at < t - Duration::hours(1) || !busy(w));
        p.cutouts.retain(|c| c.from < t - Duration::hours(1));
        p.events.push((t, Work::Cutout { hours: 1e6 }));
        p.cutouts.push(OpenSpan { from: t, to: None });
    }
}

/// Refuses to write over a database that holds a real plant.
pub fn check_target(plant: &Plant) -> Result<()> {
    match plant.info() {
        Ok(info) if info.name != DEMO_NAME => Err(PlantError::Setting {
            name: "--db".into(),
            message: format!(
                "{} holds the plant '{}'; the demo writes only to a new file or to a demo database",
                plant.path().display(),
                info.name
            ),
        }),
        _ => Ok(()),
    }
}
