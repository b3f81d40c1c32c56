//! The shift screens (ratatui + crossterm). `App` holds the state and turns
//! actions into effects; [`Session`] performs the effects against the plant, so
//! tests drive the same code as the terminal does, without a terminal.

pub mod app;
mod cell;
mod draw;
mod entries;
pub mod form;
pub mod keys;
pub mod overlay;
mod plan;
mod rectifier;
mod tankhouse;

use anyhow::Result;
use ratatui::crossterm::event::{self, Event, KeyEventKind};
use std::sync::Arc;
use std::sync::atomic::{AtomicBool, Ordering};
use std::time::Duration as StdDuration;

use app::{Action, App, CheckVerdict, Effect};
use keys::Key;

pub use draw::draw;

use crate::domain::charge::Time;
use crate::plant::{Plant, PlantError};

/// The plant and the screens' state together; what a key press does end to end.
pub struct Session {
    pub plant: Plant,
    pub app: App,
    clock: fn() -> Time,
}

impl Session {
    /// Opens the screens on a plant with a layout, as of `clock()`.
    pub fn open(plant: Plant, clock: fn() -> Time, color: bool) -> Result<Session> {
        let info = plant.info()?;
        let mut app = App::new(info.name.clone(), plant.path().display().to_string(), info.days, clock(), color);
        app.shifts_per_day = info.plan.shifts_per_day.max(1);
        let mut s = Session { plant, app, clock };
        s.perform(Effect::Reload);
        Ok(s)
    }

    /// One key, as the terminal would deliver it.
    pub fn press(&mut self, key: Key) {
        let action = if self.app.overlay.is_some() { Some(Action::Input(key)) } else { keys::resolve(self.app.view, key) };
        if let Some(a) = action {
            self.act(a);
        }
    }

    /// Types each character of `s` as a key.
    pub fn type_str(&mut self, s: &str) {
        for c in s.chars() {
            self.press(Key::Char(c));
        }
    }

    pub fn act(&mut self, action: Action) {
        if let Some(e) = self.app.update(action) {
            self.perform(e);
        }
    }

    /// Performs an effect and whatever follows from it.
    pub fn perform(&mut self, first: Effect) {
        let mut next = Some(first);
        while let Some(effect) = next.take() {
            next = self.perform_one(effect);
        }
    }

    fn perform_one(&mut self, effect: Effect) -> Option<Effect> {
        let app = &mut self.app;
        let plant = &mut self.plant;
        match effect {
            Effect::Reload => {
                let now = (self.clock)();
                match plant.forecast(now, None) {
                    Ok(f) => {
                        let circuits = plant.circuit_names().unwrap_or_default();
                        app.loaded_forecast(f, circuits);
                    }
                    Err(e) => app.failed(format!("could not read the forecast: {e}")),
                }
                match app.view {
                    app::View::Cell => return app.selected().map(|c| Effect::LoadDetail(c.cell.clone())),
                    app::View::Rectifier => return Some(Effect::LoadTrends),
                    app::View::Entries => return Some(Effect::LoadRecent),
                    app::View::Plan => return Some(Effect::LoadPlan),
                    app::View::Tankhouse => {}
                }
                None
            }
            Effect::LoadDetail(cell) => {
                match plant.cell_detail(&cell, app.as_of) {
                    Ok(d) => app.loaded_detail(d),
                    Err(e) => app.failed(format!("could not read {cell}: {e}")),
                }
                None
            }
            Effect::LoadTrends => {
                match plant.rectifiers(app.as_of, app.rectifiers.span_days) {
                    Ok(t) => app.loaded_trends(t),
                    Err(e) => app.failed(format!("could not read the current log: {e}")),
                }
                None
            }
            Effect::LoadRecent => {
                match plant.recent_events(None, 300) {
                    Ok(e) => app.loaded_recent(e),
                    Err(e) => app.failed(format!("could not read the entries: {e}")),
                }
                None
            }
            Effect::LoadPlan => {
                let opts = crate::plant::PlanOptions { days: app.plan.days, moves: app.plan.moves.clone(), ..Default::default() };
                match plant.plan(&opts, app.as_of) {
                    Ok(p) => {
                        app.loaded_plan(p);
                        None
                    }
                    Err(e) => app.plan_refused(e.to_string()),
                }
            }
            Effect::Check(batch) => {
                let verdict = match plant.check_batch(&batch) {
                    Ok(_) => Ok(()),
                    Err(PlantError::Questioned(q)) => Err(CheckVerdict::Questioned(q)),
                    Err(PlantError::Rejected { field, entry, message }) => {
                        Err(CheckVerdict::Rejected { field: Some(field), entry, message })
                    }
                    Err(e) => Err(CheckVerdict::Rejected { field: None, entry: None, message: e.to_string() }),
                };
                app.checked(batch, verdict);
                None
            }
            Effect::Commit(batch) => {
                let r = plant.record_batch(&batch).map_err(|e| e.to_string());
                app.committed(batch, r)
            }
            Effect::ImportReading { circuit, at, amps, by } => {
                let csv = format!("time,circuit,amps\n{},{circuit},{amps}\n", at.to_rfc3339());
                match plant.import_current(csv.as_bytes(), &format!("reading typed by {by}"), app.as_of) {
                    Ok(s) if s.added == 1 => {
                        app.status = Some(app::Status { text: format!("recorded {amps} A on {circuit}"), bad: false });
                        Some(Effect::Reload)
                    }
                    Ok(_) => {
                        app.failed("that reading is already stored".into());
                        None
                    }
                    Err(e) => {
                        app.failed(format!("NOT SAVED: {e}"));
                        None
                    }
                }
            }
            Effect::OfferUndo => {
                match plant.recent_events(None, 200) {
                    Ok(ev) => app.offer_undo(ev.into_iter().find(|e| e.kind != crate::domain::history::EventKind::Void && !e.voided)),
                    Err(e) => app.failed(e.to_string()),
                }
                None
            }
            Effect::Undo(id) => {
                let opts = crate::plant::Opts { by: app.who.clone().unwrap_or_default(), force: false, now: app.as_of };
                let r = plant.undo(Some(id), &opts).map_err(|e| e.to_string());
                app.undone(r)
            }
        }
    }
}

/// Runs the screens in the terminal until the foreman quits or a signal ends it;
/// the terminal is restored on every way out, a panic included.
pub fn run(plant: Plant, clock: fn() -> Time) -> Result<()> {
    let color = std::env::var_os("NO_COLOR").is_none_or(|v| v.is_empty());
    let mut session = Session::open(plant, clock, color)?;
    let stop = Arc::new(AtomicBool::new(false));
    for sig in [signal_hook::consts::SIGTERM, signal_hook::consts::SIGHUP] {
        signal_hook::flag::register(sig, Arc::clone(&stop))?;
    }
    let mut terminal = ratatui::init();
    let result = (|| -> Result<()> {
        let size = terminal.size()?;
        session.act(Action::Resize(size.width, size.height));
        let mut last_reload = std::time::Instant::now();
        loop {
            terminal.draw(|f| draw(f, &session.app))?;
            if stop.load(Ordering::Relaxed) || session.app.quit {
                return Ok(());
            }
            if event::poll(StdDuration::from_millis(250))? {
                match event::read()? {
                    Event::Key(k) if k.kind != KeyEventKind::Release => {
                        if let Some(key) = Key::from_event(k) {
                            session.press(key);
                        }
                    }
                    Event::Resize(w, h) => session.act(Action::Resize(w, h)),
                    _ => {}
                }
            } else if last_reload.elapsed() > StdDuration::from_secs(300) && session.app.overlay.is_none() {
                // keep "as of" and the due times current on a screen left open
                session.perform(Effect::Reload);
                last_reload = std::time::Instant::now();
            }
        }
    })();
    ratatui::restore();
    result
}
