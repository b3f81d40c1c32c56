//! The handover page itself: the maud template and its print stylesheet.

use maud::{DOCTYPE, Markup, PreEscaped, html};

use super::{CircuitPeriod, DueWindow, ReportData, charts};
use crate::domain::balance::CopperBalance;
use crate::domain::charge::Time;

/// Screen and print styles, inline: A4 or Letter, each part on its own page.
const CSS: &str = r#"
@page { margin: 10mm 10mm; }
* { box-sizing: border-box; }
body { font-family: "DejaVu Sans", "Liberation Sans", Arial, sans-serif; font-size: 8.5pt; line-height: 1.25; color: #1e1e1e; margin: 0 auto; max-width: 190mm; padding: 6mm 0; }
h1 { font-size: 15pt; margin: 0 0 2mm; }
h2 { font-size: 11pt; margin: 3mm 0 1mm; border-bottom: 1.5px solid #1e1e1e; break-after: avoid; }
h3 { font-size: 9pt; margin: 2mm 0 0.5mm; break-after: avoid; }
p { margin: 1mm 0; }
table { border-collapse: collapse; width: 100%; margin: 1mm 0 2mm; }
th, td { text-align: left; padding: 0.6mm 1.5mm; border-bottom: 0.5px solid #bbb; vertical-align: top; }
th { background: #eee; font-weight: 600; }
td.n, th.n { text-align: right; font-variant-numeric: tabular-nums; }
.meta td { border: none; padding: 0.3mm 2mm 0.3mm 0; }
.advisory { border: 1.5px solid #b3261e; padding: 1.5mm 2.5mm; margin: 2mm 0; background: #fff6f5; }
.low, .bad { color: #b3261e; font-weight: 600; }
.undone { text-decoration: line-through; color: #777; }
.muted { color: #666; }
.due { columns: 4; column-gap: 5mm; margin: 0; padding: 0; list-style: none; }
.due li { break-inside: avoid; }
figure { margin: 1mm 0 2mm; break-inside: avoid; }
figure svg { width: 100%; height: auto; display: block; }
.grid { display: grid; grid-template-columns: 1fr 1fr; column-gap: 4mm; }
.grid p { align-self: center; }
td.t { white-space: nowrap; }
.meta td:first-child { width: 22mm; white-space: nowrap; }
section { break-inside: auto; }
section.page { break-before: page; }
section.page + section.flow { margin-top: 2mm; }
tr, .advisory, .keep { break-inside: avoid; }
@media print { body { padding: 0; max-width: none; } a { color: inherit; text-decoration: none; } }
"#;

fn clock(d: &ReportData, t: Time) -> String {
    d.zone.show(t)
}

/// Month-day and time: enough inside a shift's tables.
fn short(d: &ReportData, t: Time) -> String {
    d.zone.show(t).get(5..).unwrap_or_default().to_string()
}

fn pct(x: f64) -> String {
    format!("{:.1} %", x * 100.0)
}

fn flags(forced: bool, voided: bool) -> &'static str {
    match (forced, voided) {
        (_, true) => "undone",
        (true, false) => "forced",
        _ => "",
    }
}

fn chart(c: Result<String, String>) -> Markup {
    match c {
        Ok(svg) => html! { figure { (PreEscaped(svg)) } },
        Err(e) => html! { p.muted { "This chart could not be drawn: " (e) } },
    }
}

/// The whole page.
pub fn render(d: &ReportData) -> String {
    let page = html! {
        (DOCTYPE)
        html lang="en" {
            head {
                meta charset="utf-8";
                meta name="viewport" content="width=device-width, initial-scale=1";
                title { (d.plant) " — shift handover, " (clock(d, d.from)) " to " (clock(d, d.to)) }
                style { (PreEscaped(CSS)) }
            }
            body {
                (header(d))
                (entries(d))
                (outlook(d))
                (charts_part(d))
                (copper(d))
            }
        }
    };
    page.into_string()
}

fn header(d: &ReportData) -> Markup {
    html! {
        header {
            h1 { (d.plant) ": shift handover" }
            table.meta {
                tr { td { "Period" } td { strong { (d.title) } ", " (clock(d, d.from)) " to " (clock(d, d.to)) " (" (d.zone.name()) ")" } }
                tr { td { "As of" } td { (clock(d, d.as_of)) " (" (d.as_of.format("%Y-%m-%dT%H:%M:%SZ")) ")" } }
                tr { td { "Logged by" } td {
                    @if d.logged_by.is_empty() { span.muted { "no entries in the period" } } @else { (d.logged_by.join(", ")) }
                } }
            }
            p.advisory { (d.advisory) }
        }
    }
}

fn entries(d: &ReportData) -> Markup {
    html! {
        section {
            h2 { "What the shift logged" }
            h3 { "Harvests (" (d.harvests.iter().filter(|h| !h.voided).count()) ")" }
            @if d.harvests.is_empty() { p.muted { "No harvests." } } @else {
                table {
                    tr { th { "Cell" } th { "Section" } th { "At" } th { "By" } th.n { "Weighed kg" } th.n { "Forecast kg" } th.n { "Weighed vs forecast" } th.n { "Current efficiency" } th { "" } }
                    @for h in &d.harvests {
                        tr class=(if h.voided { "undone" } else { "" }) {
                            td { (h.cell) } td { (h.section) } td.t { (short(d, h.at)) } td { (h.by) }
                            td.n { (format!("{:.0}", h.kg)) }
                            td.n { @if let Some(f) = h.forecast_kg { (format!("{f:.0}")) } @else { "–" } }
                            td.n { @if let Some(f) = h.forecast_kg.filter(|f| *f > 0.0) { (format!("{:+.1} %", (h.kg / f - 1.0) * 100.0)) } @else { "–" } }
                            td.n { @if let Some(e) = h.efficiency { (pct(e)) } @else { "–" } }
                            td { (flags(h.forced, h.voided)) }
                        }
                    }
                }
            }
            h3 { "Anode changes (" (d.pulls.iter().filter(|p| !p.voided).count()) ")" }
            @if d.pulls.is_empty() { p.muted { "No anodes pulled." } } @else {
                table {
                    tr { th { "Cell" } th { "At" } th { "By" } th.n { "Scrap kg" } th.n { "Scrap" } th.n { "Forecast" } th.n { "Target (range)" } th { "New anodes" } th { "" } }
                    @for p in &d.pulls {
                        @let off = p.scrap_fraction.is_some_and(|f| f < p.target.0 || f > p.target.2);
                        tr class=(if p.voided { "undone" } else { "" }) {
                            td { (p.cell) } td.t { (short(d, p.at)) } td { (p.by) }
                            td.n { (format!("{:.0}", p.scrap_kg)) }
                            td.n class=(if off { "bad" } else { "" }) { @if let Some(f) = p.scrap_fraction { (pct(f)) } @else { "–" } }
                            td.n { @if let Some(f) = p.forecast_fraction { (pct(f)) } @else { "–" } }
                            td.n { (format!("{:.0} % ({:.0}–{:.0} %)", p.target.1 * 100.0, p.target.0 * 100.0, p.target.2 * 100.0)) }
                            td { @if let Some((n, kg)) = p.new_anodes { (format!("{n} × {kg:.0} kg")) } @else { "none set" } }
                            td { (flags(p.forced, p.voided)) }
                        }
                    }
                }
            }
            h3 { "Shorts, cut-outs, outages, setpoints, anodes and undos (" (d.others.len()) ")" }
            @if d.others.is_empty() { p.muted { "None." } } @else {
                table {
                    tr { th { "Entry" } th { "Kind" } th { "Where" } th { "At" } th { "By" } th { "What" } th { "" } }
                    @for e in &d.others {
                        tr class=(if e.voided { "undone" } else { "" }) {
                            td.n { (e.event) } td { (e.kind) } td { (e.place) } td.t { (short(d, e.at)) } td { (e.by) } td { (e.what) }
                            td { (flags(e.forced, e.voided)) }
                        }
                    }
                }
            }
            h3 { "Cell voltages" }
            @let v = &d.voltages;
            p {
                (v.readings) " readings"
                @if let Some((lo, hi)) = v.refining_range { "; refining cells " (format!("{lo:.3}–{hi:.3} V")) }
                @if v.outside.is_empty() { "; none outside its cell's plausible range." } @else { "; outside the plausible range: " }
            }
            @if !v.outside.is_empty() {
                table {
                    tr { th { "Cell" } th { "At" } th.n { "Volts" } }
                    @for (cell, t, volts) in &v.outside { tr.bad { td { (cell) } td { (short(d, *t)) } td.n { (format!("{volts:.3}")) } } }
                }
            }
        }
    }
}

fn due_window(d: &ReportData, w: &DueWindow) -> Markup {
    let of = |kind: &str| w.due.iter().filter(|x| x.kind == kind).collect::<Vec<_>>();
    html! {
        h3 { (w.title) ", " (short(d, w.from)) " to " (short(d, w.to)) }
        @for (kind, label) in [("harvest", "Harvests"), ("anode_change", "Anode changes")] {
            @let due = of(kind);
            p { strong { (label) " (" (due.len()) ")" } @if due.is_empty() { span.muted { ": none due" } } }
            @if !due.is_empty() {
                ul.due {
                    @for x in due {
                        li class=(if x.overdue { "bad" } else { "" }) { (x.cell) " · " (short(d, x.at)) @if x.overdue { " late" } }
                    }
                }
            }
        }
    }
}

fn outlook(d: &ReportData) -> Markup {
    html! {
        section {
            h2 { "Coming due (forecast as of " (clock(d, d.to)) "; late: already past its due time)" }
            @for w in &d.outlook { (due_window(d, w)) }
            @if d.thin_anodes.is_empty() { p { strong { "Thin anodes: " } span.muted { "none; no cell's anodes are under its thickness limit." } } } @else {
                p.bad {
                    strong { "Thin anodes (" (d.thin_anodes.len()) "): " }
                    @for (i, (cell, mm)) in d.thin_anodes.iter().enumerate() { @if i > 0 { ", " } (cell) " " (format!("{mm:.1} mm")) }
                    ". They can drop off their lugs: change them first."
                }
            }
            (patrol(d))
        }
    }
}

/// The cells to check for shorts, as `tankbook patrol` ranks them.
fn patrol(d: &ReportData) -> Markup {
    html! {
        @if d.patrol.is_empty() {
            p { strong { "Patrol for shorts: " } span.muted { "no cell's voltage, efficiency or shorts point at a short." } }
        } @else {
            h3 { "Patrol for shorts (" (d.patrol.len()) ", most suspect first)" }
            table {
                thead { tr { th { "Cell" } th { "Section" } th.n { "Volts" } th.n { "mV vs section" } th.n { "Current efficiency" } th.n { "Shorts this crop" } th { "Why" } } }
                tbody {
                    @for c in &d.patrol {
                        tr {
                            td { (c.cell) }
                            td { (c.circuit) " " (c.section) }
                            td.n { (format!("{:.3}", c.voltage)) }
                            td.n { (format!("{:+.0}", c.deviation_mv)) }
                            td.n { (pct(c.cathode_efficiency)) }
                            td.n { (c.shorts_this_crop) }
                            td { (c.reasons.join("; ")) }
                        }
                    }
                }
            }
        }
    }
}

fn charts_part(d: &ReportData) -> Markup {
    html! {
        section.page {
            h2 { "Charts" }
            @for c in &d.circuits { (circuit_chart(d, c)) }
            @if d.efficiencies.is_empty() { p.muted { "No crop has been weighed yet." } } @else { (chart(charts::efficiency(&d.efficiencies))) }
            div.grid {
                @if d.harvested_by_section.iter().any(|s| s.harvested_kg > 0.0) { (chart(charts::harvested(&d.harvested_by_section))) }
                @else { p.muted { "No cathodes harvested in the period." } }
                @if d.pulls.iter().any(|p| !p.voided) { (chart(charts::scrap(&d.pulls))) } @else { p.muted { "No anodes pulled in the period." } }
                @match &d.crew {
                    Ok(days) if !days.is_empty() => {
                        (chart(charts::crew(days)))
                        p.muted {
                            "The crew plan for the coming production days (advisory): anode changes placed per day against the crew's capacity"
                            @if d.crew_shifts_per_day > 1 { ", split over " (d.crew_shifts_per_day) " shifts a day" }
                            ". Lifts, lock-out and acid handling follow site procedures."
                        }
                    }
                    Ok(_) => p.muted { "The crew plan has no days." },
                    Err(e) => p.muted { "No crew plan: " (e) },
                }
            }
        }
    }
}

fn circuit_chart(d: &ReportData, c: &CircuitPeriod) -> Markup {
    html! {
        (chart(charts::current(c, &d.zone, d.from, d.to)))
        p.muted {
            (c.name) ": " (format!("{:.0}", c.charge_ah.0 / 1000.0)) " kA·h measured"
            @if c.charge_ah.1 > 0.0 { ", " (format!("{:.0}", c.charge_ah.1 / 1000.0)) " kA·h estimated after the last reading" }
            @if !c.outages.is_empty() { "; outages shaded red" }
            @if !c.gaps.is_empty() { "; reading gaps shaded grey" }
            "."
        }
    }
}

fn balance_row(b: &CopperBalance) -> Markup {
    let t = |x: f64| format!("{x:.2}");
    html! {
        tr {
            td { (b.circuit) }
            td.n { (t(b.copper_in_t)) } td.n { (t(b.cathode_out_t)) } td.n { (t(b.scrap_out_t)) }
            td.n { (t(b.in_cells_start_t)) } td.n { (t(b.in_cells_end_t)) }
            td.n { strong { (t(b.residual_t)) } } td.n { (t(b.faraday_electrolyte_t)) }
            td.n { (t(b.liberator_taken_t)) } td.n { (t(b.electrolyte_net_t)) }
        }
    }
}

fn copper(d: &ReportData) -> Markup {
    let b = &d.balance;
    html! {
        section.flow {
            div.keep {
            h2 { "Copper" }
            p {
                "Copper plated in the refining cells (Faraday's law, the efficiencies in use): " strong { (format!("{:.2} t", d.plated_t)) }
                "; cathodes weighed: " strong { (format!("{:.2} t", d.harvested_t)) }
                @if let Some(e) = d.energy_kwh_per_t { "; energy about " strong { (format!("{e:.0} kWh/t")) } " (the cells' last voltages)" }
                "."
            }
            h3 { "Copper balance of the period, t" }
            table {
                tr { th { "Circuit" } th.n { "In (anodes, sheets)" } th.n { "Cathodes out" } th.n { "Scrap out" } th.n { "In cells, start" } th.n { "In cells, end" } th.n { "Residual" } th.n { "Faraday gain" } th.n { "Liberators took" } th.n { "Electrolyte net" } }
                @for c in &b.circuits { (balance_row(c)) }
                (balance_row(&b.plant))
            }
            p.muted {
                "Residual = in − out − (in cells at the end − at the start): the copper gone into the electrolyte, or lost, or mis-weighed. "
                "Faraday gain = anode copper dissolved − cathode copper deposited, from the charge. A residual far from it points at the weighings. "
                "Liberator (inert-anode) cells are shown apart: the copper they took out of the electrolyte."
            }
            }
            h2 { "Data warnings (" (d.warnings.len()) ")" }
            @if d.warnings.is_empty() { p.muted { "None." } } @else {
                table {
                    tr { th { "Code" } th { "Where" } th { "From" } th { "To" } th { "What" } }
                    @for w in &d.warnings {
                        tr {
                            td { (w.code) } td { (w.cell.clone().or(w.circuit.clone()).unwrap_or_default()) }
                            td { @if let Some(t) = w.from { (short(d, t)) } } td { @if let Some(t) = w.to { (short(d, t)) } }
                            td { (w.message) }
                        }
                    }
                }
            }
            p.muted { "tankbook, " (clock(d, d.as_of)) ". " (d.advisory) }
        }
    }
}
