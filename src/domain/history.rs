//! A cell's event history replayed into what it implies: the anode loads, the
//! cathode crops and the cut-outs, or the first entry that contradicts the rest.

use serde::Serialize;

use super::charge::{OpenSpan, Time};

/// What kind of entry an event records.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Hash, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum EventKind {
    Scrap,
    Harvest,
    Anodes,
    Cutout,
    Outage,
    Shorts,
    Setpoint,
    Voltage,
    Reading,
    /// A hand move of a cell's anode change kept for later plans (`at`: the start of its production day).
    KeptMove,
    Void,
}

impl EventKind {
    pub const ALL: [EventKind; 11] = [
        EventKind::Scrap,
        EventKind::Harvest,
        EventKind::Anodes,
        EventKind::Cutout,
        EventKind::Outage,
        EventKind::Shorts,
        EventKind::Setpoint,
        EventKind::Voltage,
        EventKind::Reading,
        EventKind::KeptMove,
        EventKind::Void,
    ];

    pub fn name(self) -> &'static str {
        match self {
            EventKind::Scrap => "scrap",
            EventKind::Harvest => "harvest",
            EventKind::Anodes => "anodes",
            EventKind::Cutout => "cutout",
            EventKind::Outage => "outage",
            EventKind::Shorts => "shorts",
            EventKind::Setpoint => "setpoint",
            EventKind::Voltage => "voltage",
            EventKind::Reading => "reading",
            EventKind::KeptMove => "kept_move",
            EventKind::Void => "void",
        }
    }

    pub fn from_name(s: &str) -> Option<EventKind> {
        EventKind::ALL.into_iter().find(|k| k.name() == s)
    }

    /// Events at the same instant apply in this order: scrap, harvest, anodes, then the rest.
    pub fn rank(self) -> u8 {
        self as u8
    }
}

/// One entry of the append-only event log.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Event {
    pub id: i64,
    pub kind: EventKind,
    pub cell: Option<String>,
    pub circuit: Option<String>,
    pub at: Time,
    pub end: Option<Time>,
    pub count: Option<u32>,
    pub kg: Option<f64>,
    pub amps: Option<f64>,
    pub volts: Option<f64>,
    pub by: String,
    pub forced: bool,
    pub recorded_at: Time,
    pub voids: Option<i64>,
    pub voided: bool,
}

/// An anode load as the history implies it.
#[derive(Debug, Clone, PartialEq)]
pub struct LoadRec {
    pub set_event: i64,
    pub set_at: Time,
    pub count: u32,
    pub mean_kg: f64,
    pub ended_at: Option<Time>,
    pub scrap_event: Option<i64>,
    pub scrap_kg: Option<f64>,
}

/// A cathode crop as the history implies it.
#[derive(Debug, Clone, PartialEq)]
pub struct CropRec {
    pub start_event: i64,
    pub started_at: Time,
    pub ended_at: Option<Time>,
    pub harvest_event: Option<i64>,
    pub harvest_kg: Option<f64>,
}

/// A cut-out as the history implies it.
#[derive(Debug, Clone, PartialEq)]
pub struct CutoutRec {
    pub event: i64,
    pub span: OpenSpan,
}

/// Everything a cell's history implies.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct CellHistory {
    pub loads: Vec<LoadRec>,
    pub crops: Vec<CropRec>,
    pub cutouts: Vec<CutoutRec>,
}

/// The entry that contradicts the history before it.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[error("{message}")]
pub struct Contradiction {
    pub event: i64,
    pub message: String,
}

/// Sort key for replaying events: time, then scrap < harvest < anodes < rest, then entry order.
pub fn replay_order(e: &Event) -> (Time, u8, i64) {
    (e.at, e.kind.rank(), e.id)
}

/// Replays a cell's live (not voided) events. A harvest ends the running crop and,
/// while anodes are in the cell, starts the next; an anode set starts a crop
/// when none is running.
pub fn replay(events: &[Event], show: impl Fn(Time) -> String) -> Result<CellHistory, Contradiction> {
    let mut ev: Vec<&Event> = events.iter().filter(|e| !e.voided && e.kind != EventKind::Void).collect();
    ev.sort_by_key(|e| replay_order(e));
    let mut r = Replay::default();
    for e in ev {
        r.step(e, &show)?;
    }
    Ok(r.finish())
}

/// A replay in progress: what the events so far imply, with the load, crop and
/// cut-out still open. [`Replay::resume`] starts from a cell's open records, so an
/// event that sorts after all of a cell's events is replayed without the rest.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Replay {
    h: CellHistory,
    load: Option<LoadRec>,
    crop: Option<CropRec>,
    open_cut: Option<usize>,
}

impl Replay {
    /// The state after a history whose open load, crop and cut-out are these.
    pub fn resume(load: Option<LoadRec>, crop: Option<CropRec>, open_cut: Option<CutoutRec>) -> Replay {
        let mut h = CellHistory::default();
        let open_cut = open_cut.map(|c| {
            h.cutouts.push(c);
            0
        });
        Replay { h, load, crop, open_cut }
    }

    /// Applies one live event (events in [`replay_order`]).
    pub fn step(&mut self, e: &Event, show: impl Fn(Time) -> String) -> Result<(), Contradiction> {
        let no = |e: &Event, message: String| Contradiction { event: e.id, message };
        let h = &mut self.h;
        match e.kind {
            EventKind::Anodes => {
                if let Some(l) = &self.load {
                    return Err(no(e, format!("anodes were already set at {} and not yet scrapped: log the scrap first", show(l.set_at))));
                }
                self.load = Some(LoadRec {
                    set_event: e.id,
                    set_at: e.at,
                    count: e.count.unwrap_or(0),
                    mean_kg: e.kg.unwrap_or(0.0),
                    ended_at: None,
                    scrap_event: None,
                    scrap_kg: None,
                });
                if self.crop.is_none() {
                    self.crop =
                        Some(CropRec { start_event: e.id, started_at: e.at, ended_at: None, harvest_event: None, harvest_kg: None });
                }
            }
            EventKind::Scrap => {
                let Some(mut l) = self.load.take() else {
                    return Err(no(e, format!("no anodes are in the cell at {} to scrap", show(e.at))));
                };
                l.ended_at = Some(e.at);
                l.scrap_event = Some(e.id);
                l.scrap_kg = e.kg;
                h.loads.push(l);
            }
            EventKind::Harvest => {
                let Some(mut c) = self.crop.take() else {
                    return Err(no(
                        e,
                        format!("no crop is growing at {}: a crop begins with an anode set or the previous harvest", show(e.at)),
                    ));
                };
                c.ended_at = Some(e.at);
                c.harvest_event = Some(e.id);
                c.harvest_kg = e.kg;
                h.crops.push(c);
                if self.load.is_some() {
                    self.crop =
                        Some(CropRec { start_event: e.id, started_at: e.at, ended_at: None, harvest_event: None, harvest_kg: None });
                }
            }
            EventKind::Cutout => {
                let open_same = self.open_cut.filter(|&i| h.cutouts[i].span.from == e.at);
                match (e.end, open_same, self.open_cut) {
                    (Some(to), Some(i), _) => {
                        h.cutouts[i].span.to = Some(to);
                        self.open_cut = None;
                    }
                    (Some(to), None, _) => h.cutouts.push(CutoutRec { event: e.id, span: OpenSpan { from: e.at, to: Some(to) } }),
                    (None, _, Some(i)) => {
                        return Err(no(
                            e,
                            format!("the cell is already cut out since {}: close that cut-out first", show(h.cutouts[i].span.from)),
                        ));
                    }
                    (None, _, None) => {
                        self.open_cut = Some(h.cutouts.len());
                        h.cutouts.push(CutoutRec { event: e.id, span: OpenSpan { from: e.at, to: None } });
                    }
                }
            }
            _ => {}
        }
        Ok(())
    }

    /// What the events imply, the open load and crop last.
    pub fn finish(self) -> CellHistory {
        let mut h = self.h;
        h.loads.extend(self.load);
        h.crops.extend(self.crop);
        h
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use chrono::{Duration, TimeZone, Utc};

    fn t(h: i64) -> Time {
        Utc.with_ymd_and_hms(2026, 3, 1, 0, 0, 0).unwrap() + Duration::hours(h)
    }
    fn ev(id: i64, kind: EventKind, h: i64) -> Event {
        Event {
            id,
            kind,
            cell: Some("A01".into()),
            circuit: None,
            at: t(h),
            end: None,
            count: Some(50),
            kg: Some(380.0),
            amps: None,
            volts: None,
            by: "JD".into(),
            forced: false,
            recorded_at: t(h),
            voids: None,
            voided: false,
        }
    }
    fn show(t: Time) -> String {
        t.to_rfc3339()
    }

    #[test]
    fn same_instant_applies_scrap_then_harvest_then_anodes() {
        // entered out of order on purpose: anodes first, scrap last
        let evs =
            vec![ev(1, EventKind::Anodes, 0), ev(4, EventKind::Anodes, 400), ev(3, EventKind::Harvest, 400), ev(2, EventKind::Scrap, 400)];
        let h = replay(&evs, show).unwrap();
        assert_eq!(h.loads.len(), 2);
        assert_eq!(h.loads[0].ended_at, Some(t(400)));
        // crop 1 harvested at 400; no anodes at that moment, so the new set starts crop 2
        assert_eq!(h.crops.len(), 2);
        assert_eq!(h.crops[1].start_event, 4);
    }

    #[test]
    fn harvest_starts_the_next_crop_while_anodes_are_in() {
        let evs = vec![ev(1, EventKind::Anodes, 0), ev(2, EventKind::Harvest, 170)];
        let h = replay(&evs, show).unwrap();
        assert_eq!(h.crops.len(), 2);
        assert_eq!(h.crops[1].started_at, t(170));
        assert_eq!(h.crops[1].ended_at, None);
    }

    #[test]
    fn contradictions_name_the_entry() {
        let e = replay(&[ev(1, EventKind::Harvest, 5)], show).unwrap_err();
        assert_eq!(e.event, 1);
        assert!(e.message.contains("no crop"));
        let e = replay(&[ev(1, EventKind::Anodes, 0), ev(2, EventKind::Anodes, 5)], show).unwrap_err();
        assert_eq!(e.event, 2);
        let e = replay(&[ev(1, EventKind::Scrap, 5)], show).unwrap_err();
        assert!(e.message.contains("no anodes"));
    }

    #[test]
    fn voided_events_do_not_count() {
        let mut second = ev(2, EventKind::Anodes, 5);
        second.voided = true;
        assert!(replay(&[ev(1, EventKind::Anodes, 0), second], show).is_ok());
    }

    #[test]
    fn resuming_from_the_open_records_equals_the_whole_replay() {
        let mut open = ev(5, EventKind::Cutout, 400);
        open.end = None;
        let evs = [
            ev(1, EventKind::Anodes, 0),
            ev(2, EventKind::Harvest, 170),
            ev(3, EventKind::Scrap, 400),
            ev(4, EventKind::Harvest, 400),
            open,
            ev(6, EventKind::Anodes, 400),
            ev(7, EventKind::Harvest, 570),
        ];
        for k in 1..evs.len() {
            let before = replay(&evs[..k], show).unwrap();
            let load = before.loads.last().filter(|l| l.ended_at.is_none()).cloned();
            let crop = before.crops.last().filter(|c| c.ended_at.is_none()).cloned();
            let cut = before.cutouts.iter().find(|c| c.span.to.is_none()).cloned();
            let mut r = Replay::resume(load.clone(), crop.clone(), cut.clone());
            r.step(&evs[k], show).unwrap();
            let tail = r.finish();
            let mut whole = before.clone();
            whole.loads.retain(|l| Some(l) != load.as_ref());
            whole.crops.retain(|c| Some(c) != crop.as_ref());
            whole.cutouts.retain(|c| Some(c) != cut.as_ref());
            whole.loads.extend(tail.loads);
            whole.crops.extend(tail.crops);
            whole.cutouts.extend(tail.cutouts);
            assert_eq!(whole, replay(&evs[..=k], show).unwrap(), "after event {}", k + 1);
        }
    }

    #[test]
    fn cutouts_open_and_close() {
        let mut open = ev(1, EventKind::Cutout, 10);
        open.end = None;
        let mut close = ev(2, EventKind::Cutout, 10);
        close.end = Some(t(12));
        let h = replay(&[open.clone(), close], show).unwrap();
        assert_eq!(h.cutouts, vec![CutoutRec { event: 1, span: OpenSpan { from: t(10), to: Some(t(12)) } }]);
        let mut again = ev(3, EventKind::Cutout, 11);
        again.end = None;
        assert!(replay(&[open, again], show).is_err());
    }
}
