//! What the shift handover report needs from the plant: the period (a shift from
//! the layout's calendar, or times given), its entries against the forecast, the
//! circuits' current, what falls due next, the crew plan and the copper balance.
//! The page itself is rendered by [`crate::report`].

use chrono::Duration;
use std::collections::{BTreeMap, BTreeSet, HashMap};
use std::path::{Path, PathBuf};

use super::{PlanOptions, Plant, PlantError, Result};
use crate::domain::charge::{Curve, Time};
use crate::domain::entry::Field;
use crate::domain::forecast::{CellForecast, Forecast};
use crate::domain::history::{Event, EventKind};
use crate::domain::layout::AnodeKind;
use crate::domain::patrol::{PatrolCell, SUSPECT_SCORE};
use crate::domain::shift::{Shift, next_shift, previous_shift, shift_of};
use crate::report::{
    ADVISORY, CellEfficiency, CircuitPeriod, CrewDay, DueLine, DueWindow, EntryLine, HarvestLine, PullLine, ReportData, SectionCopper,
    VoltageSummary,
};
use crate::store::StoreCurve;

/// The period a report covers.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum ReportPeriod {
    /// The shift in progress, from its start up to now.
    CurrentShift,
    /// The last whole shift before the one in progress.
    LastShift,
    /// Any period `(from, to]`.
    Between(Time, Time),
}

/// A report written to a file.
#[derive(Debug, Clone, PartialEq)]
pub struct WrittenReport {
    pub path: PathBuf,
    pub title: String,
    pub from: Time,
    pub to: Time,
    pub bytes: usize,
}

/// Readings per circuit chart: enough for a smooth line over a shift or a month.
const CHART_POINTS: usize = 400;

/// The most suspect cells the report lists for the patrol (the rest are on
/// `tankbook patrol`): a page, not a second patrol screen.
const PATROL_SHOWN: usize = 12;

fn who(e: &Event) -> String {
    e.by.clone()
}

impl Plant {
    /// The shift `t` falls in, on the layout's calendar.
    pub fn shift_at(&self, t: Time) -> Result<Shift> {
        let info = self.info()?;
        Ok(shift_of(&info.days, info.plan.shifts_per_day, t))
    }

    /// The bounds and the title of a report period as of `now`.
    pub fn report_period(&self, which: ReportPeriod, now: Time) -> Result<(Time, Time, String)> {
        let info = self.info()?;
        let n = info.plan.shifts_per_day;
        let title = |s: &Shift, what: &str| format!("{what}: shift {} of {}, production day {}", s.number, s.of, s.day);
        Ok(match which {
            ReportPeriod::CurrentShift => {
                let s = shift_of(&info.days, n, now);
                (s.start, now, title(&s, "Shift in progress"))
            }
            ReportPeriod::LastShift => {
                let s = previous_shift(&info.days, n, &shift_of(&info.days, n, now));
                (s.start, s.end, title(&s, "Last shift"))
            }
            ReportPeriod::Between(a, b) => {
                if a >= b {
                    return Err(PlantError::rejected(Field::From, "the period must end after it starts"));
                }
                (a, b, "Chosen period".to_string())
            }
        })
    }

    /// Everything the handover page shows for `which`, as of `now`.
    pub fn report(&self, which: ReportPeriod, now: Time) -> Result<ReportData> {
        let info = self.info()?;
        let (from, to, title) = self.report_period(which, now)?;
        let db = self.store.db();
        let forecast = self.forecast(to, None)?;
        let cells: HashMap<String, &CellForecast> = forecast.cells.iter().map(|c| (c.cell.clone(), c)).collect();
        let params = db.params_at_all(to)?;
        let events = db.events_between(from, to)?;
        let logged_by: BTreeSet<String> = events.iter().map(who).collect();

        let mut harvests = Vec::new();
        let mut pulls = Vec::new();
        let mut others = Vec::new();
        let mut voltages = VoltageSummary::default();
        let mut per_section: BTreeMap<(usize, String, String), f64> = BTreeMap::new();
        let circuit_order = self.circuit_names()?;
        // anode sets that go with a pull at the same time are shown with it
        let sets: HashMap<(String, Time), (u32, f64, bool)> = events
            .iter()
            .filter(|e| e.kind == EventKind::Anodes)
            .filter_map(|e| Some(((e.cell.clone()?, e.at), (e.count.unwrap_or(0), e.kg.unwrap_or(0.0), e.voided))))
            .collect();
        let pulled: BTreeSet<(String, Time)> =
            events.iter().filter(|e| e.kind == EventKind::Scrap).filter_map(|e| Some((e.cell.clone()?, e.at))).collect();
        for e in &events {
            let cell = e.cell.clone().unwrap_or_default();
            let row = cells.get(&cell);
            match e.kind {
                EventKind::Harvest => {
                    let before = self.forecast(e.at - Duration::seconds(1), Some(&cell)).ok();
                    let p = db.params_at(&cell, e.at)?;
                    let forecast_kg = before
                        .as_ref()
                        .and_then(|f| f.cells.first())
                        .and_then(|c| c.cathode.as_ref())
                        .map(|k| k.mass_kg * f64::from(p.cathodes_per_cell) + p.starter_sheets_kg());
                    let crop =
                        db.crops_between(&cell, e.at - Duration::seconds(1), e.at)?.into_iter().find(|k| k.harvest_event == Some(e.id));
                    let section = row.map(|c| c.section.clone()).unwrap_or_default();
                    if !e.voided && e.at > from && e.at <= to {
                        let ci = row.and_then(|c| circuit_order.iter().position(|n| *n == c.circuit)).unwrap_or(usize::MAX);
                        let circuit = row.map(|c| c.circuit.clone()).unwrap_or_default();
                        *per_section.entry((ci, circuit, section.clone())).or_default() += e.kg.unwrap_or(0.0);
                    }
                    harvests.push(HarvestLine {
                        event: e.id,
                        cell,
                        section,
                        at: e.at,
                        by: who(e),
                        kg: e.kg.unwrap_or(0.0),
                        efficiency: crop.and_then(|k| k.efficiency),
                        forecast_kg,
                        forced: e.forced,
                        voided: e.voided,
                    });
                }
                EventKind::Scrap => {
                    let p = db.params_at(&cell, e.at)?;
                    let load = db.loads(&cell)?.into_iter().find(|l| l.ended_at == Some(e.at));
                    let before = self.forecast(e.at - Duration::seconds(1), Some(&cell)).ok();
                    let forecast_fraction =
                        before.as_ref().and_then(|f| f.cells.first()).and_then(|c| c.anode.as_ref()).map(|a| a.remaining_fraction);
                    let kg = e.kg.unwrap_or(0.0);
                    pulls.push(PullLine {
                        event: e.id,
                        at: e.at,
                        by: who(e),
                        scrap_kg: kg,
                        scrap_fraction: load.filter(|l| l.count > 0 && l.mean_kg > 0.0).map(|l| kg / (f64::from(l.count) * l.mean_kg)),
                        forecast_fraction,
                        target: (p.scrap_lower, p.scrap_target, p.scrap_upper),
                        new_anodes: sets.get(&(cell.clone(), e.at)).filter(|s| !s.2).map(|s| (s.0, s.1)),
                        forced: e.forced,
                        voided: e.voided,
                        cell,
                    });
                }
                EventKind::Voltage => {
                    if e.voided || !(e.at > from && e.at <= to) {
                        continue;
                    }
                    let v = e.volts.unwrap_or(0.0);
                    voltages.readings += 1;
                    if let Some(p) = params.get(&cell) {
                        if v < p.voltage_min || v > p.voltage_max {
                            voltages.outside.push((cell.clone(), e.at, v));
                        } else if p.anode_kind == AnodeKind::Soluble {
                            let r = voltages.refining_range.get_or_insert((v, v));
                            *r = (r.0.min(v), r.1.max(v));
                        }
                    }
                }
                EventKind::Anodes if pulled.contains(&(cell.clone(), e.at)) && !e.voided => {}
                _ => others.push(self.entry_line(e, from, to)),
            }
        }

        let mut circuits = Vec::new();
        for c in db.circuits()? {
            let curve = StoreCurve::new(db, c.id, to)?;
            let (a, b) = (curve.cum_at(from)?, curve.cum_at(to)?);
            circuits.push(CircuitPeriod {
                points: db.readings_between(c.id, from, to, CHART_POINTS)?,
                outages: db.outages(c.id)?.into_iter().filter(|s| s.to > from && s.from < to).collect(),
                gaps: db.reading_gaps(c.id, from, to + Duration::days(1))?.into_iter().filter(|s| s.from < to).collect(),
                charge_ah: (b.measured - a.measured, b.estimated - a.estimated),
                name: c.name,
                max_amps: c.max_amps,
            });
        }
        let mut harvested_by_section: Vec<SectionCopper> = Vec::new();
        for c in db.cells()? {
            if !harvested_by_section.iter().any(|s| s.circuit == c.circuit && s.section == c.section) {
                let ci = circuit_order.iter().position(|n| *n == c.circuit).unwrap_or(usize::MAX);
                let kg = per_section.get(&(ci, c.circuit.clone(), c.section.clone())).copied().unwrap_or(0.0);
                harvested_by_section.push(SectionCopper { circuit: c.circuit, section: c.section, harvested_kg: kg });
            }
        }
        let efficiencies = forecast
            .cells
            .iter()
            .filter(|c| c.anode_kind == AnodeKind::Soluble)
            .filter_map(|c| {
                let p = params.get(&c.cell)?;
                Some(CellEfficiency {
                    cell: c.cell.clone(),
                    section: c.section.clone(),
                    efficiency: c.last_crop_efficiency?,
                    low_below: p.low_efficiency_below,
                })
            })
            .collect();
        let crew = match self.plan(&PlanOptions::default(), to.max(now)) {
            Ok(plan) => Ok(plan
                .days
                .iter()
                .map(|d| CrewDay { date: d.date, load: d.crew_load, capacity: d.crew_capacity, harvests: d.harvests.len() })
                .collect()),
            Err(e) => Err(e.to_string()),
        };
        let outlook = self.outlook_windows(&forecast, to)?;
        let thin_anodes = forecast
            .cells
            .iter()
            .filter(|c| c.warnings.iter().any(|w| w.code == "thin_anode"))
            .filter_map(|c| Some((c.cell.clone(), c.anode.as_ref()?.thickness_mm?)))
            .collect();
        let patrol: Vec<PatrolCell> = self.patrol(to)?.cells.into_iter().filter(|c| c.score >= SUSPECT_SCORE).take(PATROL_SHOWN).collect();
        let balance = self.balance(from, to)?;
        let energy = crate::domain::balance::mean_energy_kwh_per_t(
            forecast
                .cells
                .iter()
                .filter(|c| c.anode_kind == AnodeKind::Soluble && c.in_circuit)
                .filter_map(|c| Some((c.energy_kwh_per_t?, c.cathode_efficiency))),
        );
        let mut warnings = forecast.warnings.clone();
        warnings.extend(forecast.cells.iter().flat_map(|c| c.warnings.iter().cloned()));
        Ok(ReportData {
            plant: info.name,
            zone: info.days.zone,
            title,
            from,
            to,
            as_of: now,
            logged_by: logged_by.into_iter().collect(),
            harvests,
            pulls,
            others,
            voltages,
            circuits,
            harvested_by_section,
            efficiencies,
            crew,
            crew_shifts_per_day: info.plan.shifts_per_day,
            outlook,
            thin_anodes,
            patrol,
            plated_t: balance.plant.plated_t,
            harvested_t: balance.plant.cathode_out_t + balance.plant.liberator_out_t,
            energy_kwh_per_t: energy,
            warnings,
            balance,
            advisory: ADVISORY,
        })
    }

    /// Writes the report of `which` to `path` (one self-contained HTML file).
    pub fn write_report(&self, which: ReportPeriod, path: &Path, now: Time) -> Result<WrittenReport> {
        let data = self.report(which, now)?;
        let html = crate::report::render(&data);
        std::fs::write(path, &html).map_err(|e| PlantError::Write(path.to_path_buf(), e))?;
        Ok(WrittenReport { path: path.to_path_buf(), title: data.title, from: data.from, to: data.to, bytes: html.len() })
    }

    /// The report of the shift in progress, written to `path`: what the screens' key does.
    pub fn write_current_shift_report(&self, path: &Path, now: Time) -> Result<WrittenReport> {
        self.write_report(ReportPeriod::CurrentShift, path, now)
    }

    /// Writes the report of the shift in progress into the folder `reports` beside
    /// the database (made if need be), named after the shift, and says where: what a
    /// key on the screens calls.
    pub fn save_shift_report(&self, now: Time) -> Result<WrittenReport> {
        let dir = self.path().parent().map_or_else(|| PathBuf::from("reports"), |d| d.join("reports"));
        std::fs::create_dir_all(&dir).map_err(|e| PlantError::Write(dir.clone(), e))?;
        let path = dir.join(self.report_file_name(ReportPeriod::CurrentShift, now)?);
        self.write_report(ReportPeriod::CurrentShift, &path, now)
    }

    /// A file name for a report of the period starting at `from`, e.g. `shift-2026-03-02-1.html`.
    pub fn report_file_name(&self, which: ReportPeriod, now: Time) -> Result<String> {
        let (from, _, _) = self.report_period(which, now)?;
        let s = self.shift_at(from)?;
        Ok(match which {
            ReportPeriod::Between(a, b) => format!("report-{}-{}.html", a.format("%Y%m%dT%H%M"), b.format("%Y%m%dT%H%M")),
            _ => format!("shift-{}-{}.html", s.day, s.number),
        })
    }

    fn entry_line(&self, e: &Event, from: Time, to: Time) -> EntryLine {
        let show = |t: Time| self.show_time(t);
        let what = match e.kind {
            EventKind::Void => format!("undoes entry {}", e.voids.unwrap_or_default()),
            EventKind::Shorts => format!("{} shorts found and cleared", e.count.unwrap_or(0)),
            EventKind::Cutout => match e.end {
                Some(end) => format!("cut out until {}", show(end)),
                None => "cut out (still out)".to_string(),
            },
            EventKind::Outage => format!("circuit down until {}", e.end.map(show).unwrap_or_default()),
            EventKind::Setpoint => format!("setpoint {:.0} A", e.amps.unwrap_or(0.0)),
            EventKind::Anodes => format!("{} anodes × {:.0} kg set", e.count.unwrap_or(0), e.kg.unwrap_or(0.0)),
            EventKind::Reading => format!("{:.0} A", e.amps.unwrap_or(0.0)),
            _ => String::new(),
        };
        let outside = !(e.at > from && e.at <= to);
        let what = if outside && e.kind != EventKind::Void { format!("{what} (entered in the period for {})", show(e.at)) } else { what };
        EntryLine {
            event: e.id,
            kind: e.kind.name(),
            place: e.cell.clone().or(e.circuit.clone()).unwrap_or_default(),
            at: e.at,
            by: who(e),
            what,
            forced: e.forced,
            voided: e.voided,
        }
    }

    /// What falls due by the end of the next shift (overdue work included), and
    /// in the rest of the next production day.
    fn outlook_windows(&self, f: &Forecast, to: Time) -> Result<Vec<DueWindow>> {
        let info = self.info()?;
        let n = info.plan.shifts_per_day;
        // the shift after the period: the one starting at `to` when the period ends on a shift change
        let current = shift_of(&info.days, n, to);
        let next = if current.start == to { current } else { next_shift(&info.days, n, &current) };
        let day_after = info.days.day_of(to).succ_opt().unwrap_or(info.days.day_of(to));
        let day_end = info.days.start_of(day_after.succ_opt().unwrap_or(day_after));
        let due = |a: Option<Time>, b: Time| -> Vec<DueLine> {
            let mut v: Vec<DueLine> = Vec::new();
            for c in &f.cells {
                if !c.in_circuit {
                    continue;
                }
                let pull = c.anode.as_ref().and_then(|x| x.pull_due);
                let harvest = c.cathode.as_ref().and_then(|x| x.harvest_due);
                for (kind, t) in [("harvest", harvest), ("anode_change", pull)] {
                    if let Some(t) = t
                        && a.is_none_or(|a| t > a)
                        && t <= b
                    {
                        v.push(DueLine { cell: c.cell.clone(), kind, at: t, overdue: t <= to });
                    }
                }
            }
            v.sort_by(|x, y| x.at.cmp(&y.at).then(x.cell.cmp(&y.cell)));
            v
        };
        let mut out = vec![DueWindow {
            title: format!("Due by the end of the next shift (shift {} of {}, {}), overdue included", next.number, next.of, next.day),
            from: to,
            to: next.end,
            due: due(None, next.end),
        }];
        if day_end > next.end {
            out.push(DueWindow {
                title: format!("Due later in production day {day_after}"),
                from: next.end,
                to: day_end,
                due: due(Some(next.end), day_end),
            });
        }
        Ok(out)
    }
}
