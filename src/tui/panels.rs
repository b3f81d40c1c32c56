//! The slower panels' loads (plan, patrol, back-tests, balance) as jobs: run at
//! once in tests, or in the terminal on a worker thread with its own connection, so keys never wait for them.
//!
//! A job carries the inputs taken when it was asked (the screen's as-of time,
//! the plan's hand moves); its result is handed to the screens only if no write
//! committed and nobody asked again meanwhile, else it is asked afresh.

use std::path::PathBuf;
use std::sync::mpsc;

use super::accuracy::AccuracyScreen;
use super::app::{App, Effect};
use crate::domain::backtest::Backtest;
use crate::domain::balance::Balance;
use crate::domain::charge::Time;
use crate::domain::patrol::Patrol;
use crate::domain::plan::Plan;
use crate::plant::{PlanOptions, Plant};

/// What the plant is asked for a slower panel.
#[derive(Debug, Clone)]
pub(super) enum Job {
    Plan(PlanOptions, Time),
    Patrol(Time),
    Accuracy(Time),
    /// The month so far, as of the clock.
    Balance(Time),
    CellBacktest(String, Time),
}

/// What the plant answered, or why not (as the screens say it).
pub(super) enum Found {
    Plan(Result<Plan, String>),
    Patrol(Result<Patrol, String>),
    /// What the accuracy screen draws (made here, so its rows are never held).
    Accuracy(Result<AccuracyScreen, String>),
    Balance(Result<Balance, String>),
    CellBacktest(String, Result<Backtest, String>),
}

/// The job a slower panel's effect asks for, with the screens' inputs now; `None` for any other effect.
pub(super) fn job_for(e: &Effect, app: &App, now: Time) -> Option<Job> {
    Some(match e {
        Effect::LoadPlan => Job::Plan(PlanOptions { days: app.plan.days, moves: app.plan.moves.clone(), ..Default::default() }, app.as_of),
        Effect::LoadPatrol => Job::Patrol(app.as_of),
        Effect::LoadAccuracy => Job::Accuracy(app.as_of),
        Effect::LoadBalance => Job::Balance(now),
        Effect::LoadCellBacktest(cell) => Job::CellBacktest(cell.clone(), app.as_of),
        _ => return None,
    })
}

pub(super) fn run(plant: &Plant, job: Job) -> Found {
    let text = |e: crate::plant::PlantError| e.to_string();
    match job {
        Job::Plan(opts, at) => Found::Plan(plant.plan(&opts, at).map_err(text)),
        Job::Patrol(at) => Found::Patrol(plant.patrol(at).map_err(text)),
        Job::Accuracy(at) => Found::Accuracy(AccuracyScreen::load(plant, at).map_err(text)),
        Job::Balance(now) => Found::Balance(plant.month_so_far(now).and_then(|(from, to)| plant.balance(from, to)).map_err(text)),
        Job::CellBacktest(cell, at) => {
            let b = plant.backtest(None, at, Some(&cell)).map_err(text);
            Found::CellBacktest(cell, b)
        }
    }
}

/// Hands a result to the screens; what follows from it (a refused replan takes its move back and plans again).
pub(super) fn apply(app: &mut App, found: Found) -> Option<Effect> {
    match found {
        Found::Plan(Ok(p)) => app.loaded_plan(p),
        Found::Plan(Err(e)) => return app.plan_refused(e),
        Found::Patrol(Ok(p)) => app.loaded_patrol(p),
        Found::Patrol(Err(e)) => app.failed(format!("could not read the patrol list: {e}")),
        Found::Accuracy(Ok(b)) => app.loaded_accuracy(b),
        Found::Accuracy(Err(e)) => app.failed(format!("could not back-test the plant: {e}")),
        Found::Balance(Ok(b)) => app.loaded_balance(b),
        Found::Balance(Err(e)) => app.balance_refused(e),
        Found::CellBacktest(cell, Ok(b)) => app.loaded_cell_backtest(cell, b),
        Found::CellBacktest(cell, Err(e)) => app.failed(format!("could not back-test {cell}: {e}")),
    }
    None
}

/// A job sent to the worker: the writes committed when it was asked, the effect it answers, the job.
type Asked = (u64, Effect, Job);
/// A job done: the writes committed when it was asked, the effect it answers, what was found.
pub(super) type Done = (u64, Effect, Found);

/// The thread that runs the jobs, one after another, on its own connection to the database.
pub(super) struct Worker {
    tx: mpsc::Sender<Asked>,
    pub(super) rx: mpsc::Receiver<Done>,
}

impl Worker {
    /// Starts the worker on the plant at `path`; it ends when the screens drop it.
    pub(super) fn start(path: PathBuf) -> std::io::Result<Worker> {
        let (tx, jobs) = mpsc::channel::<Asked>();
        let (done, rx) = mpsc::channel::<Done>();
        std::thread::Builder::new().name("slower panels".into()).spawn(move || {
            let plant = Plant::open(&path).map_err(|e| e.to_string());
            for (writes, effect, job) in jobs {
                let found = match &plant {
                    Ok(p) => run(p, job),
                    Err(e) => refused(job, e),
                };
                if done.send((writes, effect, found)).is_err() {
                    return;
                }
            }
        })?;
        Ok(Worker { tx, rx })
    }

    /// Sends a job; false if the worker has ended.
    pub(super) fn ask(&self, writes: u64, effect: Effect, job: Job) -> bool {
        self.tx.send((writes, effect, job)).is_ok()
    }
}

/// The answer to every job when the worker could not open the database.
fn refused(job: Job, e: &str) -> Found {
    let e = format!("cannot open the database: {e}");
    match job {
        Job::Plan(..) => Found::Plan(Err(e)),
        Job::Patrol(_) => Found::Patrol(Err(e)),
        Job::Accuracy(_) => Found::Accuracy(Err(e)),
        Job::Balance(_) => Found::Balance(Err(e)),
        Job::CellBacktest(cell, _) => Found::CellBacktest(cell, Err(e)),
    }
}
