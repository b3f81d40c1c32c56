//! The shift screens (ratatui + crossterm). `App` holds the state and turns
//! actions into effects; [`Session`] performs the effects against the plant, so
//! tests drive the same code as the terminal does, without a terminal.

mod accuracy;
pub mod app;
mod balance;
mod cell;
mod draw;
mod entries;
pub mod form;
pub mod input;
pub mod keys;
pub mod overlay;
mod panels;
mod patrol;
mod plan;
mod rectifier;
mod tankhouse;

use anyhow::Result;
use ratatui::crossterm::cursor::Show;
use ratatui::crossterm::execute;
use ratatui::crossterm::terminal::{EnterAlternateScreen, LeaveAlternateScreen, disable_raw_mode, enable_raw_mode};
use std::io::Write;
use std::panic::AssertUnwindSafe;
use std::sync::atomic::{AtomicBool, AtomicUsize, Ordering};
use std::sync::{Arc, mpsc};
use std::time::{Duration as StdDuration, Instant};

use app::{Action, App, Changed, CheckVerdict, Effect};
use keys::Key;

pub use draw::draw;

use crate::domain::charge::Time;
use crate::plant::{Plant, PlantError};

/// The plant and the screens' state together; what a key press does end to end.
pub struct Session {
    pub plant: Plant,
    pub app: App,
    clock: fn() -> Time,
    backups: Backups,
    reports: Reports,
    /// Put the slower panels' loads off until the frame is drawn (the terminal
    /// does; tests drive every load at once unless they ask for this).
    pub defer: bool,
    /// Loads waiting for the frame to be drawn, oldest first (the whole plant's forecast after the first frame).
    pending: Vec<Effect>,
    /// The thread that loads the slower panels in the terminal (started at the first).
    worker: Option<panels::Worker>,
    /// The slower panels' loads asked of it, each with whether it was asked again meanwhile.
    in_flight: Vec<(Effect, bool)>,
    /// Writes committed so far: a load asked before the latest write is asked afresh.
    writes: u64,
    /// When the whole plant was last forecast, and whether entries refreshed
    /// some of its cells since (then the rest is brought up to the clock soon).
    full_at: Instant,
    refreshed_since: bool,
}

/// How long after a whole-plant forecast a screen left open forecasts it all again.
const FULL_RELOAD: StdDuration = StdDuration::from_secs(300);
/// How long after a whole-plant forecast, once entries refreshed part of it, the
/// rest is brought up to the clock (the part an entry touched is forecast at once).
const FULL_AFTER_REFRESH: StdDuration = StdDuration::from_secs(60);

/// The slower panels: read after the frame is drawn, never before it.
fn is_slow(e: &Effect) -> bool {
    matches!(e, Effect::LoadPlan | Effect::LoadPatrol | Effect::LoadAccuracy | Effect::LoadBalance | Effect::LoadCellBacktest(_))
}

/// What a shift report written in the background reports: its file, or why not.
type ReportResult = std::result::Result<std::path::PathBuf, String>;

/// The shift report, written on a thread of its own (with its own connection
/// to the database) so the keys never wait for it; one at a time.
struct Reports {
    tx: mpsc::Sender<ReportResult>,
    rx: mpsc::Receiver<ReportResult>,
    running: bool,
}

/// What a background backup reports: its file (`None`: none was due), or why it failed.
type BackupResult = std::result::Result<Option<std::path::PathBuf>, String>;

/// The day's automatic backup, made on a thread of its own after a write
/// commits so the keys never wait for it; one at a time.
struct Backups {
    tx: mpsc::Sender<BackupResult>,
    rx: mpsc::Receiver<BackupResult>,
    running: bool,
    /// A write committed while one was running: ask again when it ends.
    again: bool,
}

impl Backups {
    fn new() -> Backups {
        let (tx, rx) = mpsc::channel();
        Backups { tx, rx, running: false, again: false }
    }
}

impl Session {
    /// Opens the screens on a plant with a layout, as of `clock()`.
    pub fn open(plant: Plant, clock: fn() -> Time, color: bool) -> Result<Session> {
        let mut s = Session::new(plant, clock, color)?;
        s.perform(Effect::Reload);
        Ok(s)
    }

    /// Opens the screens as the terminal does: only the first whole sections
    /// holding `first` cells (a screenful) are forecast before the first frame,
    /// the whole plant right after it ([`Session::run_pending`]; a key waits for
    /// it); slower panels are put off likewise ([`Session::defer`]).
    pub fn open_first(plant: Plant, clock: fn() -> Time, color: bool, first: usize) -> Result<Session> {
        let mut s = Session::new(plant, clock, color)?;
        s.defer = true;
        let part = s.plant.first_cells(first).and_then(|(t, whole)| Ok((s.plant.forecast_touched(clock(), &t)?, whole)));
        match (part, s.plant.circuit_names()) {
            // a plant no bigger than a screenful: that was its whole forecast
            (Ok((f, true)), Ok(circuits)) => s.app.loaded_forecast(f, circuits),
            (Ok((f, false)), Ok(circuits)) => {
                s.app.loaded_forecast(f, circuits);
                s.app.partial = true;
                s.app.updating = true;
                s.pending.push(Effect::Reload);
            }
            _ => s.perform(Effect::Reload),
        }
        Ok(s)
    }

    fn new(plant: Plant, clock: fn() -> Time, color: bool) -> Result<Session> {
        let info = plant.info()?;
        let mut app = App::new(info.name.clone(), plant.path().display().to_string(), info.days, clock(), color);
        app.shifts_per_day = info.plan.shifts_per_day.max(1);
        app.drafts = plant.drafts()?;
        let (tx, rx) = mpsc::channel();
        let reports = Reports { tx, rx, running: false };
        Ok(Session {
            plant,
            app,
            clock,
            backups: Backups::new(),
            reports,
            defer: false,
            pending: Vec::new(),
            worker: None,
            in_flight: Vec::new(),
            writes: 0,
            full_at: Instant::now(),
            refreshed_since: false,
        })
    }

    /// One key, as the terminal would deliver it. A key after the first frame
    /// first waits for the whole plant's forecast: forms and moves need every cell.
    pub fn press(&mut self, key: Key) {
        while self.app.partial && self.has_pending() {
            self.run_pending();
        }
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

    /// Performs an effect and whatever follows from it; with [`Session::defer`],
    /// a slower panel's load goes to the worker thread (see [`Session::settle`]).
    pub fn perform(&mut self, first: Effect) {
        let mut next = Some(first);
        while let Some(effect) = next.take() {
            if self.defer && is_slow(&effect) {
                self.ask(effect);
                continue;
            }
            next = self.perform_one(effect);
        }
    }

    /// Asks the worker for a slower panel's load (here and now if it cannot be started).
    fn ask(&mut self, effect: Effect) {
        if let Some(asked) = self.in_flight.iter_mut().find(|(e, _)| *e == effect) {
            // its inputs (the hand moves, the selected cell's data) may have changed: ask afresh when it ends
            asked.1 = true;
            return;
        }
        let Some(job) = panels::job_for(&effect, &self.app, (self.clock)()) else { return };
        if self.worker.is_none() {
            self.worker = panels::Worker::start(self.plant.path().to_path_buf()).ok();
        }
        match &self.worker {
            Some(w) if w.ask(self.writes, effect.clone(), job.clone()) => {
                self.in_flight.push((effect, false));
                self.app.updating = true;
            }
            _ => {
                self.worker = None;
                if let Some(n) = panels::apply(&mut self.app, panels::run(&self.plant, job)) {
                    self.perform(n);
                }
            }
        }
    }

    /// A load the worker finished: handed to the screens if still wanted and
    /// current, asked afresh if a write or a new ask came meanwhile.
    fn take_done(&mut self, (writes, effect, found): panels::Done) {
        let again = match self.in_flight.iter().position(|(e, _)| *e == effect) {
            Some(i) => self.in_flight.remove(i).1,
            None => false,
        };
        if !self.app.wants(&effect) {
            // its screen was left: it is read again when it opens
        } else if again || writes != self.writes {
            self.ask(effect);
        } else if let Some(n) = panels::apply(&mut self.app, found) {
            self.perform(n);
        }
        self.app.updating = self.busy();
    }

    /// Whether a load is waiting or being made.
    pub fn busy(&self) -> bool {
        !self.pending.is_empty() || !self.in_flight.is_empty()
    }

    /// Waits up to `limit` for every load put off to be made and handed to the
    /// screens (the tests' view of what the terminal does over time); whether none is left.
    pub fn settle(&mut self, limit: StdDuration) -> bool {
        let end = Instant::now() + limit;
        while self.has_pending() {
            self.run_pending();
        }
        while !self.in_flight.is_empty() {
            let Some(w) = &self.worker else { return false };
            match w.rx.recv_timeout(end.saturating_duration_since(Instant::now())) {
                Ok(d) => self.take_done(d),
                Err(_) => return false,
            }
        }
        true
    }

    /// Whether a load waits for the frame to be drawn.
    pub fn has_pending(&self) -> bool {
        !self.pending.is_empty()
    }

    /// Performs the oldest load put off (if its screen is still in view) and what follows from it.
    pub fn run_pending(&mut self) {
        if !self.pending.is_empty() {
            let e = self.pending.remove(0);
            if self.app.wants(&e) {
                let next = self.perform_one(e);
                if let Some(n) = next {
                    self.perform(n);
                }
            }
        }
        self.app.updating = self.busy();
    }

    /// Whether the whole plant is due to be forecast again: a while after the
    /// last time, sooner once entries refreshed part of it (only on a screen
    /// with no form open, see the event loop).
    fn full_reload_due(&self) -> bool {
        let since = self.full_at.elapsed();
        since > FULL_RELOAD || (self.refreshed_since && since > FULL_AFTER_REFRESH)
    }

    /// Starts writing the shift report in the background, with its own
    /// connection to the database; the result comes back through [`Session::poll_background`].
    fn start_report(&mut self) {
        if self.reports.running {
            self.app.say("the shift report is still being written…");
            return;
        }
        let (path, now, tx) = (self.plant.path().to_path_buf(), (self.clock)(), self.reports.tx.clone());
        let spawned = std::thread::Builder::new().name("shift report".into()).spawn(move || {
            let r = Plant::open(&path).and_then(|p| p.save_shift_report(now)).map(|w| w.path).map_err(|e| e.to_string());
            let _ = tx.send(r);
        });
        match spawned {
            Ok(_) => self.reports.running = true,
            Err(e) => self.app.report_saved(Err(format!("cannot start writing it: {e}"))),
        }
    }

    /// Takes in finished background work (a slower panel, a backup, a shift report): whether the screen changed.
    pub fn poll_background(&mut self) -> bool {
        let mut backup = self.poll_backups();
        while let Some(d) = self.worker.as_ref().and_then(|w| w.rx.try_recv().ok()) {
            self.take_done(d);
            backup = true;
        }
        match self.reports.rx.try_recv() {
            Ok(r) => {
                self.reports.running = false;
                self.app.report_saved(r);
                true
            }
            Err(_) => backup,
        }
    }

    /// Waits up to `limit` for the shift report being written (if any); whether none is left running.
    pub fn finish_report(&mut self, limit: StdDuration) -> bool {
        if self.reports.running {
            match self.reports.rx.recv_timeout(limit) {
                Ok(r) => {
                    self.reports.running = false;
                    self.app.report_saved(r);
                }
                Err(_) => return false,
            }
        }
        true
    }

    /// Starts the day's backup in the background after a write committed (an
    /// entry, an undo, a kept move, an approval; never a draft). The result
    /// comes back through [`Session::poll_backups`].
    fn start_backup(&mut self) {
        if self.backups.running {
            self.backups.again = true;
            return;
        }
        let (path, now, tx) = (self.plant.path().to_path_buf(), (self.clock)(), self.backups.tx.clone());
        let spawned = std::thread::Builder::new().name("daily backup".into()).spawn(move || {
            let r = crate::plant::backup_if_due(&path, now).map_err(|e| format!("{e:#}"));
            let _ = tx.send(r);
        });
        match spawned {
            Ok(_) => self.backups.running = true,
            Err(e) => self.app.backup_done(Err(format!("cannot start it: {e}"))),
        }
    }

    /// Takes in a finished background backup, if one has finished: whether the screen changed.
    pub fn poll_backups(&mut self) -> bool {
        match self.backups.rx.try_recv() {
            Ok(r) => {
                self.backup_finished(r);
                true
            }
            Err(_) => false,
        }
    }

    fn backup_finished(&mut self, r: BackupResult) {
        self.backups.running = false;
        self.app.backup_done(r);
        if std::mem::take(&mut self.backups.again) {
            self.start_backup();
        }
    }

    /// Waits up to `limit` for the background backup (if any) to finish, as the
    /// screens end, so it is not cut short; whether none is left running.
    pub fn finish_backups(&mut self, limit: StdDuration) -> bool {
        let end = Instant::now() + limit;
        while self.backups.running {
            match self.backups.rx.recv_timeout(end.saturating_duration_since(Instant::now())) {
                Ok(r) => self.backup_finished(r),
                Err(_) => return false,
            }
        }
        true
    }

    fn perform_one(&mut self, effect: Effect) -> Option<Effect> {
        let mut wrote = false;
        let next = self.perform_effect(effect, &mut wrote);
        if wrote {
            self.writes += 1;
            self.start_backup();
        }
        next
    }

    /// Performs one effect; `wrote` is set when it committed a write.
    fn perform_effect(&mut self, effect: Effect, wrote: &mut bool) -> Option<Effect> {
        let app = &mut self.app;
        let plant = &mut self.plant;
        match effect {
            Effect::Reload => {
                app.partial = false;
                let now = (self.clock)();
                match plant.forecast(now, None) {
                    Ok(f) => {
                        let circuits = plant.circuit_names().unwrap_or_default();
                        app.loaded_forecast(f, circuits);
                        self.full_at = Instant::now();
                        self.refreshed_since = false;
                    }
                    Err(e) => app.failed(format!("could not read the forecast: {e}")),
                }
                app.view_load()
            }
            Effect::Refresh(changed) => {
                let touched = match &changed {
                    Changed::Entries(entries) => plant.touched_by_entries(entries).map(Some),
                    Changed::Undone(e) => plant.touched_by_event(e),
                    Changed::Reading(circuit) => plant.touched_by_circuit(circuit).map(Some),
                };
                // an entry on neither a cell nor a circuit, or one the plant cannot place: all of it
                let Ok(Some(touched)) = touched else { return Some(Effect::Reload) };
                match plant.forecast_touched((self.clock)(), &touched) {
                    Ok(f) => {
                        app.refreshed(f, &touched);
                        self.refreshed_since = true;
                    }
                    Err(e) => app.failed(format!("could not read the forecast: {e}")),
                }
                app.view_load()
            }
            Effect::LoadDetail(cell) => {
                match plant.cell_detail(&cell, app.as_of) {
                    Ok(d) => app.loaded_detail(d),
                    Err(e) => app.failed(format!("could not read {cell}: {e}")),
                }
                Some(Effect::LoadCellBacktest(cell))
            }
            e @ (Effect::LoadPlan | Effect::LoadPatrol | Effect::LoadAccuracy | Effect::LoadBalance | Effect::LoadCellBacktest(_)) => {
                let job = panels::job_for(&e, app, (self.clock)())?;
                panels::apply(app, panels::run(plant, job))
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
                *wrote = r.is_ok();
                app.committed(batch, r)
            }
            Effect::ImportReading { circuit, at, amps, by } => {
                let csv = format!("time,circuit,amps\n{},{circuit},{amps}\n", at.to_rfc3339());
                match plant.import_current(csv.as_bytes(), &format!("reading typed by {by}"), app.as_of) {
                    Ok(s) if s.added == 1 => {
                        *wrote = true;
                        app.status = Some(app::Status { text: format!("recorded {amps} A on {circuit}"), bad: false });
                        Some(Effect::Refresh(Changed::Reading(circuit)))
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
            Effect::DropDraft(id) => {
                if let Err(e) = plant.drop_draft(id) {
                    app.failed(format!("could not remove draft {id}: {e}"));
                }
                None
            }
            Effect::Undo(id) => {
                let opts = crate::plant::Opts { by: app.who.clone().unwrap_or_default(), force: false, now: app.as_of };
                let r = plant.undo(Some(id), &opts).map_err(|e| e.to_string());
                *wrote = r.is_ok();
                app.undone(r)
            }
            Effect::SaveReport => {
                self.start_report();
                None
            }
            Effect::KeepMove(cell, date) => {
                let opts = crate::plant::PlanOptions { days: app.plan.days, moves: vec![(cell.clone(), date)], ..Default::default() };
                let r = plant.keep_moves(&opts, &app.opts(false)).map(|(entries, _)| entries).map_err(|e| e.to_string());
                *wrote = r.is_ok();
                app.kept(&cell, date, r)
            }
            Effect::ApprovePlan => {
                let r = match &app.plan.plan {
                    Some(p) => plant.approve_plan(p, &app.opts(false)).map_err(|e| e.to_string()),
                    None => Err("there is no plan on screen".to_string()),
                };
                *wrote = r.is_ok();
                app.approved(r)
            }
        }
    }
}

/// How the screens' loop ended.
#[derive(Debug, Clone, PartialEq)]
pub enum Ended {
    /// The foreman quit.
    Quit,
    /// The terminal went away (closed, end of input, a read or write error).
    Gone(String),
    /// SIGTERM, SIGHUP, SIGINT or Ctrl-C.
    Signal(&'static str),
}

/// A panic inside the screens: the terminal is restored, the form kept, and the
/// one line about it has been printed already.
#[derive(Debug, thiserror::Error)]
#[error("internal error in the screens")]
pub struct Panicked;

impl Session {
    /// Keeps the form being typed (if any) as a draft in the database; its id.
    /// Called as the terminal goes away: quick, and it starts nothing else.
    pub fn keep_draft(&mut self, reason: &str) -> Option<i64> {
        let form = self.app.unconfirmed_form()?;
        let (kind, typed) = (form.kind.name(), form.typed());
        let who = self.app.who.clone();
        self.plant.save_draft(kind, &typed, who.as_deref(), (self.clock)(), reason).ok()
    }
}

fn signal_name(sig: usize) -> &'static str {
    match sig as i32 {
        signal_hook::consts::SIGTERM => "SIGTERM",
        signal_hook::consts::SIGHUP => "SIGHUP",
        signal_hook::consts::SIGINT => "SIGINT",
        _ => "a signal",
    }
}

/// Runs the screens in the terminal until the foreman quits, the terminal goes
/// away or a signal ends them; the terminal is restored on every way out, a
/// panic included, and a form being typed is kept as a draft.
pub fn run(plant: Plant, clock: fn() -> Time) -> Result<()> {
    let color = std::env::var_os("NO_COLOR").is_none_or(|v| v.is_empty());
    // a screenful of tiles, at most, for the first frame
    let (cols, rows) = ratatui::crossterm::terminal::size().unwrap_or((80, 24));
    let first = usize::from(cols.saturating_sub(1) / tankhouse::TILE_W).max(1) * usize::from(rows);
    let mut session = Session::open_first(plant, clock, color, first)?;
    // the first signal asks the loop to end; a second one ends the process at once
    let signalled = Arc::new(AtomicBool::new(false));
    let which = Arc::new(AtomicUsize::new(0));
    for sig in [signal_hook::consts::SIGTERM, signal_hook::consts::SIGHUP, signal_hook::consts::SIGINT] {
        signal_hook::flag::register_conditional_shutdown(sig, 1, Arc::clone(&signalled))?;
        signal_hook::flag::register(sig, Arc::clone(&signalled))?;
        signal_hook::flag::register_usize(sig, Arc::clone(&which), sig as usize)?;
    }
    let resized = Arc::new(AtomicBool::new(true));
    signal_hook::flag::register(signal_hook::consts::SIGWINCH, Arc::clone(&resized))?;
    let (tx, keys) = mpsc::channel();
    input::spawn(tx)?;
    quiet_restore_on_panic();
    let mut terminal = enter()?;
    let ended = std::panic::catch_unwind(AssertUnwindSafe(|| event_loop(&mut terminal, &mut session, &keys, &which, &resized)));
    leave(terminal);
    let mut err = std::io::stderr();
    match ended {
        Ok(Ok(Ended::Quit)) => {
            // a backup still being made finishes rather than being cut short (a cut one is redone next time)
            if !session.finish_backups(StdDuration::from_secs(20)) {
                let _ =
                    writeln!(err, "tankbook: today's backup was still being made and is cut short; it is made again after the next entry");
            }
            Ok(())
        }
        Ok(Ok(Ended::Gone(why))) => {
            session.keep_draft(&why);
            Ok(())
        }
        Ok(Ok(Ended::Signal(name))) => {
            let kept = session.keep_draft(&format!("ended by {name}"));
            let note = if kept.is_some() { "; the form being typed is kept and offered at the next start" } else { "" };
            let _ = writeln!(err, "tankbook: ended by {name}{note}");
            Ok(())
        }
        Ok(Err(e)) => {
            session.keep_draft("the screens failed");
            Err(e)
        }
        Err(_) => {
            // the panic hook has printed its one line
            if session.keep_draft("internal error").is_some() {
                let _ = writeln!(err, "tankbook: the form being typed is kept and offered at the next start");
            }
            Err(Panicked.into())
        }
    }
}

/// Raw mode and the alternate screen, and a terminal to draw on.
fn enter() -> std::io::Result<ratatui::DefaultTerminal> {
    enable_raw_mode()?;
    execute!(std::io::stdout(), EnterAlternateScreen)?;
    ratatui::Terminal::new(ratatui::prelude::CrosstermBackend::new(std::io::stdout()))
}

/// Puts the terminal back (line mode, main screen, cursor shown), each step
/// tried even if another fails. The terminal may be gone, so nothing here
/// prints or panics: ratatui's own restore and its terminal's drop print with
/// `eprintln!`, which panics on a dead terminal, so the terminal is not dropped.
fn leave(terminal: ratatui::DefaultTerminal) {
    let _ = disable_raw_mode();
    let _ = execute!(std::io::stdout(), LeaveAlternateScreen, Show);
    std::mem::forget(terminal);
}

/// A panic inside the screens puts the terminal back first, quietly, then the
/// hook before it says what happened in one line.
fn quiet_restore_on_panic() {
    let hook = std::panic::take_hook();
    std::panic::set_hook(Box::new(move |info| {
        let _ = disable_raw_mode();
        let _ = execute!(std::io::stdout(), LeaveAlternateScreen, Show);
        hook(info);
    }));
}

/// Draws and reads keys until the screens end. It waits on the keyboard
/// reader's channel with a timeout, so signals and a vanished terminal are
/// noticed within a tenth of a second. A slower panel's load runs only once the
/// frame is drawn and no key is waiting, one at a time, each followed by a frame.
fn event_loop(
    terminal: &mut ratatui::DefaultTerminal,
    session: &mut Session,
    keys: &mpsc::Receiver<input::Input>,
    which: &AtomicUsize,
    resized: &AtomicBool,
) -> Result<Ended> {
    let mut size = (0, 0);
    let mut size_asked = Instant::now();
    let mut dirty = true;
    loop {
        let sig = which.load(Ordering::Relaxed);
        if sig != 0 {
            return Ok(Ended::Signal(signal_name(sig)));
        }
        if session.app.quit {
            return Ok(Ended::Quit);
        }
        // the size is asked on SIGWINCH, and every few seconds in case one was missed
        if resized.swap(false, Ordering::Relaxed) || size_asked.elapsed() > StdDuration::from_secs(2) {
            size_asked = Instant::now();
            match terminal.size() {
                Ok(s) if (s.width, s.height) != size => {
                    size = (s.width, s.height);
                    session.act(Action::Resize(s.width, s.height));
                    dirty = true;
                }
                Ok(_) => {}
                Err(e) => return Ok(Ended::Gone(format!("the terminal's size cannot be read: {e}"))),
            }
        }
        if session.poll_background() {
            dirty = true;
        }
        if dirty {
            if let Err(e) = terminal.draw(|f| draw(f, &session.app)) {
                return Ok(Ended::Gone(format!("the terminal cannot be written: {e}")));
            }
            dirty = false;
        }
        // a panel being made elsewhere is shown within 10 ms of being ready
        let wait = StdDuration::from_millis(if session.busy() { 10 } else { 100 });
        let input = if session.has_pending() {
            match keys.try_recv() {
                Ok(i) => Some(i),
                Err(mpsc::TryRecvError::Empty) => {
                    session.run_pending();
                    dirty = true;
                    continue;
                }
                Err(mpsc::TryRecvError::Disconnected) => return Ok(Ended::Gone("the keyboard reader stopped".into())),
            }
        } else {
            match keys.recv_timeout(wait) {
                Ok(i) => Some(i),
                Err(mpsc::RecvTimeoutError::Disconnected) => return Ok(Ended::Gone("the keyboard reader stopped".into())),
                Err(mpsc::RecvTimeoutError::Timeout) => None,
            }
        };
        match input {
            Some(input::Input::Key(Key::CtrlC)) => {
                if session.app.interrupt() {
                    return Ok(Ended::Signal("Ctrl-C"));
                }
                dirty = true;
            }
            Some(input::Input::Key(k)) => {
                session.press(k);
                dirty = true;
            }
            Some(input::Input::Gone(why)) => return Ok(Ended::Gone(why)),
            None => {
                if session.full_reload_due() && session.app.overlay.is_none() {
                    // keep "as of" and the due times current on a screen left open
                    session.perform(Effect::Reload);
                    dirty = true;
                }
            }
        }
    }
}
