//! The shift screens without a terminal: key sequences drive the same session
//! the terminal does (state tests), and whole screens are drawn into ratatui's
//! TestBackend at 80×24 and 160×48 and compared with reviewed snapshots.
#![allow(clippy::unwrap_used, clippy::expect_used, clippy::panic)] // tests stop loudly (DEVELOPERS.md)

use chrono::{DateTime, Utc};
use ratatui::Terminal;
use ratatui::backend::TestBackend;
use std::path::PathBuf;
use std::sync::OnceLock;
use tankbook::demo::{DemoSpec, build};
use tankbook::domain::charge::Time;
use tankbook::plant::Plant;
use tankbook::tui::app::{Action, Overlay, View};
use tankbook::tui::form::FieldKey;
use tankbook::tui::keys::Key;
use tankbook::tui::{Session, draw};

fn fixed() -> Time {
    DateTime::parse_from_rfc3339("2026-11-20T05:30:00Z").unwrap().with_timezone(&Utc)
}

/// The demo plant, built once per test run; each test works on its own backup copy.
fn demo_db() -> &'static PathBuf {
    static DB: OnceLock<(tempfile::TempDir, PathBuf)> = OnceLock::new();
    &DB.get_or_init(|| {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("demo.db");
        let mut plant = Plant::open(&path).unwrap();
        build(&mut plant, &DemoSpec::default(), fixed()).unwrap();
        (dir, path)
    })
    .1
}

struct Fixture {
    _dir: tempfile::TempDir,
    s: Session,
}

fn session() -> Fixture {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("plant.db");
    Plant::open(demo_db()).unwrap().backup(&path).unwrap();
    let mut s = Session::open(Plant::open(&path).unwrap(), fixed, false).unwrap();
    s.app.db_path = "demo.db".into();
    s.act(Action::Resize(80, 24));
    Fixture { _dir: dir, s }
}

fn screen(s: &Session, w: u16, h: u16) -> String {
    let mut app = s.app.clone();
    app.width = w;
    app.height = h;
    let mut t = Terminal::new(TestBackend::new(w, h)).unwrap();
    t.draw(|f| draw(f, &app)).unwrap();
    let buf = t.backend().buffer().clone();
    let mut out = String::new();
    for y in 0..h {
        let line: String = (0..w).map(|x| buf[(x, y)].symbol().to_string()).collect();
        out.push_str(line.trim_end());
        out.push('\n');
    }
    out
}

fn start(f: &mut Fixture) {
    f.s.type_str("ak");
    f.s.press(Key::Enter);
}

fn clear_field(s: &mut Session) {
    for _ in 0..20 {
        s.press(Key::Backspace);
    }
}

fn forecast_of(s: &Session, cell: &str) -> tankbook::domain::forecast::CellForecast {
    s.plant.forecast(fixed(), Some(cell)).unwrap().cells.remove(0)
}

#[test]
fn initials_are_asked_first_and_recorded_with_every_entry() {
    let mut f = session();
    assert!(matches!(f.s.app.overlay, Some(Overlay::Initials(_))));
    f.s.press(Key::Char('n'));
    assert!(f.s.app.who.is_none(), "n is typed into the initials, not a command");
    clear_field(&mut f.s);
    start(&mut f);
    assert_eq!(f.s.app.who.as_deref(), Some("AK"));
    assert!(f.s.app.overlay.is_none());
}

#[test]
fn harvest_a_range_of_cells_through_the_form() {
    let mut f = session();
    start(&mut f);
    // weigh what the charge predicts, less 1 %: plausible, so not questioned
    let weights: Vec<String> =
        ["A01", "A02", "A03"].iter().map(|c| format!("{:.0}", forecast_of(&f.s, c).cathode.unwrap().mass_kg * 51.0 * 0.99)).collect();
    // the efficiency each forecast used (learnt from the cell's crops)
    let used: Vec<f64> = ["A01", "A02", "A03"].iter().map(|c| forecast_of(&f.s, c).cathode_efficiency).collect();
    let before = f.s.plant.recent_events(None, 1).unwrap()[0].id;
    f.s.type_str("/A01");
    f.s.press(Key::Enter);
    f.s.type_str("nh");
    assert!(matches!(f.s.app.overlay, Some(Overlay::Form(_))));
    f.s.press(Key::BackTab);
    clear_field(&mut f.s);
    f.s.type_str("A01-A03");
    f.s.press(Key::Tab);
    f.s.type_str(&weights.join(","));
    f.s.press(Key::Enter);
    assert!(
        matches!(&f.s.app.overlay, Some(Overlay::Review(r)) if r.questions.is_empty() && r.entries.len() == 3),
        "{:?}",
        f.s.app.overlay
    );
    assert_eq!(f.s.plant.recent_events(None, 1).unwrap()[0].id, before, "nothing is written before the yes");
    f.s.press(Key::Char('y'));
    let ev = f.s.plant.recent_events(None, 3).unwrap();
    assert_eq!(ev.iter().map(|e| e.cell.clone().unwrap()).collect::<Vec<_>>(), ["A03", "A02", "A01"]);
    assert!(ev.iter().all(|e| e.by == "AK" && !e.forced));
    for (c, eff) in ["A01", "A02", "A03"].into_iter().zip(used) {
        let fc = forecast_of(&f.s, c);
        assert_eq!(fc.cathode.unwrap().started_at, fixed(), "{c}: a new crop starts at the harvest");
        assert!((fc.last_crop_efficiency.unwrap() - eff * 0.99).abs() < 0.02);
    }
    // the screen's forecast updated at once
    let a01 = f.s.app.cells.iter().find(|c| c.cell == "A01").unwrap();
    assert!(a01.cathode.as_ref().unwrap().mass_kg < 1.0);
    assert!(f.s.app.status.as_ref().unwrap().text.contains("recorded harvest for A01–A03"));
}

#[test]
fn a_questioned_entry_needs_a_second_explicit_yes() {
    let mut f = session();
    start(&mut f);
    f.s.type_str("/A05");
    f.s.press(Key::Enter);
    f.s.type_str("nh");
    f.s.type_str("99999");
    f.s.press(Key::Enter);
    // 99 999 kg is over the hard limit for 51 cathodes: rejected beside the field
    let Some(Overlay::Form(form)) = &f.s.app.overlay else { panic!("{:?}", f.s.app.overlay) };
    assert!(form.fields[1].error.as_deref().unwrap_or("").contains("at most 15300"), "{form:?}");
    clear_field(&mut f.s);
    f.s.type_str("12000");
    f.s.press(Key::Enter);
    assert!(matches!(&f.s.app.overlay, Some(Overlay::Review(r)) if !r.questions.is_empty()));
    let before = f.s.plant.recent_events(None, 1).unwrap()[0].id;
    f.s.press(Key::Char('y'));
    assert_eq!(f.s.plant.recent_events(None, 1).unwrap()[0].id, before, "y alone does not record a questioned entry");
    f.s.press(Key::Char('F'));
    f.s.press(Key::Char('y'));
    let e = &f.s.plant.recent_events(None, 1).unwrap()[0];
    assert!(e.forced && e.kg == Some(12_000.0));
}

#[test]
fn undo_asks_then_appends_a_void() {
    let mut f = session();
    start(&mut f);
    let newest = f.s.plant.recent_events(None, 1).unwrap().remove(0);
    f.s.press(Key::Char('u'));
    assert!(matches!(&f.s.app.overlay, Some(Overlay::ConfirmUndo(e)) if e.id == newest.id));
    f.s.press(Key::Char('n'));
    assert!(!f.s.plant.recent_events(None, 1).unwrap()[0].voided);
    f.s.press(Key::Char('u'));
    f.s.press(Key::Char('y'));
    let ev = f.s.plant.recent_events(None, 2).unwrap();
    assert_eq!(ev[0].voids, Some(newest.id));
    assert!(ev[1].voided);
}

#[test]
fn esc_drops_a_form_and_nothing_changes() {
    let mut f = session();
    start(&mut f);
    let before = f.s.plant.dump().unwrap();
    f.s.type_str("na");
    f.s.type_str("380");
    f.s.press(Key::Esc);
    assert!(f.s.app.overlay.is_none());
    assert_eq!(before, f.s.plant.dump().unwrap());
}

#[test]
fn moving_jumping_and_views() {
    let mut f = session();
    start(&mut f);
    f.s.type_str("/b05");
    f.s.press(Key::Enter);
    assert_eq!(f.s.app.selected().unwrap().cell, "B05");
    f.s.press(Key::Char('l'));
    assert_eq!(f.s.app.selected().unwrap().cell, "B06");
    f.s.press(Key::Char('j'));
    assert_eq!(f.s.app.selected().unwrap().cell, "B11", "five tiles a line at 80 columns");
    f.s.press(Key::Tab);
    assert_eq!(f.s.app.selected().unwrap().cell, "C01");
    f.s.press(Key::Enter);
    assert_eq!(f.s.app.view, View::Cell);
    assert_eq!(f.s.app.cell.detail.as_ref().unwrap().forecast.cell, "C01");
    f.s.press(Key::Esc);
    f.s.press(Key::Char('r'));
    assert_eq!(f.s.app.view, View::Rectifier);
    assert_eq!(f.s.app.rectifiers.trends.len(), 2);
    f.s.press(Key::Char('q'));
    assert!(f.s.app.quit);
}

#[test]
fn an_entry_that_fails_to_save_is_kept() {
    let mut f = session();
    start(&mut f);
    let entry = tankbook::domain::entry::Entry::Shorts { cell: "A01".into(), at: fixed(), count: 1 };
    let batch = vec![(entry, tankbook::plant::Opts { by: "AK".into(), force: false, now: fixed() })];
    assert_eq!(f.s.app.committed(batch.clone(), Err("disk I/O error".into())), None);
    assert_eq!(f.s.app.unsaved, Some(batch.clone()));
    assert!(f.s.app.status.as_ref().unwrap().text.contains("NOT SAVED"));
    assert!(screen(&f.s, 80, 24).contains("UNSAVED"));
    // the failure also opens as a notice; then w retries with the same entry and q asks before losing it
    assert!(matches!(f.s.app.overlay, Some(Overlay::Notice(_))));
    f.s.press(Key::Esc);
    f.s.press(Key::Char('q'));
    assert!(matches!(f.s.app.overlay, Some(Overlay::ConfirmQuit)) && !f.s.app.quit);
    f.s.press(Key::Char('n'));
    f.s.press(Key::Char('w'));
    assert_eq!(f.s.app.unsaved, None);
    assert_eq!(f.s.plant.recent_events(None, 1).unwrap()[0].kind.name(), "shorts");
}

fn snap(name: &str, s: &Session) {
    for (w, h) in [(80, 24), (160, 48)] {
        insta::assert_snapshot!(format!("{name}_{w}x{h}"), screen(s, w, h));
    }
}

#[test]
fn snapshots_of_every_view() {
    let mut f = session();
    start(&mut f);
    f.s.app.status = None;
    snap("tankhouse", &f.s);
    f.s.type_str("/A09");
    f.s.press(Key::Enter);
    f.s.press(Key::Enter);
    snap("cell", &f.s);
    f.s.press(Key::Char('r'));
    snap("rectifier", &f.s);
    f.s.press(Key::Char('e'));
    snap("entries", &f.s);
    f.s.press(Key::Char('t'));
    f.s.press(Key::Char('?'));
    snap("help", &f.s);
    f.s.press(Key::Esc);
    f.s.press(Key::Char('L'));
    snap("legend", &f.s);
    f.s.press(Key::Esc);
    f.s.type_str("nh");
    snap("harvest_form", &f.s);
    f.s.press(Key::Esc);
    f.s.app.status = None;
    f.s.press(Key::Char('p'));
    snap("plan", &f.s);
}

#[test]
fn a_new_shift_asks_for_initials_again() {
    let mut f = session();
    start(&mut f);
    // the demo plant runs two shifts a day from 06:00 local (05:00 UTC): 12 h later is the next shift
    let later = fixed() + chrono::Duration::hours(12);
    let fc = f.s.plant.forecast(later, None).unwrap();
    f.s.app.loaded_forecast(fc, vec!["R1".into(), "R2".into()]);
    assert!(matches!(f.s.app.overlay, Some(Overlay::Initials(_))), "{:?}", f.s.app.overlay);
    f.s.type_str("dt");
    f.s.press(Key::Enter);
    assert_eq!(f.s.app.who.as_deref(), Some("DT"));
    // the same shift does not ask again
    let fc = f.s.plant.forecast(later + chrono::Duration::hours(1), None).unwrap();
    f.s.app.loaded_forecast(fc, vec!["R1".into(), "R2".into()]);
    assert!(f.s.app.overlay.is_none());
}

#[test]
fn an_anode_change_is_one_confirmed_entry_of_scrap_crop_and_anodes() {
    let mut f = session();
    start(&mut f);
    f.s.press(Key::Char('d'));
    let cell = f.s.app.selected().unwrap().clone();
    assert!(tankbook::domain::outlook::states(&cell, fixed(), f.s.app.day_end()).iter().any(|s| matches!(
        s,
        tankbook::domain::outlook::CellState::AnodesDue
            | tankbook::domain::outlook::CellState::HarvestDue
            | tankbook::domain::outlook::CellState::HarvestOverdue
    )));
    // go to a cell due for anodes
    let due =
        f.s.app.cells.iter().find(|c| c.anode.as_ref().and_then(|a| a.pull_due).is_some_and(|t| t < f.s.app.day_end())).unwrap().clone();
    f.s.type_str(&format!("/{}", due.cell));
    f.s.press(Key::Enter);
    let a = due.anode.as_ref().unwrap();
    let k = due.cathode.as_ref().unwrap();
    let scrap = format!("{:.0}", a.remaining_kg * f64::from(a.count));
    let crop = format!("{:.0}", k.inner_mass_kg * f64::from(a.count) * 0.99);
    f.s.type_str("na");
    f.s.type_str(&scrap);
    f.s.press(Key::Tab);
    f.s.type_str(&crop);
    f.s.press(Key::Tab);
    f.s.press(Key::Tab);
    f.s.type_str("381");
    f.s.press(Key::Enter);
    assert!(
        matches!(&f.s.app.overlay, Some(Overlay::Review(r)) if r.entries.len() == 3 && r.questions.is_empty()),
        "{:?}",
        f.s.app.overlay
    );
    f.s.press(Key::Char('y'));
    let after = forecast_of(&f.s, &due.cell);
    let na = after.anode.unwrap();
    assert_eq!((na.set_at, na.initial_kg, na.count), (fixed(), 381.0, a.count));
    assert_eq!(after.cathode.unwrap().started_at, fixed());
    let ev = f.s.plant.recent_events(Some(&due.cell), 3).unwrap();
    let kinds: Vec<&str> = ev.iter().map(|e| e.kind.name()).collect();
    assert_eq!(kinds, ["anodes", "harvest", "scrap"]);
}

#[test]
fn the_plan_screen_moves_a_change_inside_its_window_and_refuses_outside() {
    let mut f = session();
    start(&mut f);
    f.s.press(Key::Char('p'));
    assert_eq!(f.s.app.view, View::Plan);
    let plan = f.s.app.plan.plan.clone().expect("a plan");
    assert!(plan.days.iter().all(|d| d.crew_load <= d.crew_capacity));
    // a change of the running load whose window opens after the first day and has another day with crew to spare
    let (day, job, target) = plan
        .days
        .iter()
        .enumerate()
        .find_map(|(i, d)| {
            d.anode_changes.iter().enumerate().filter(|(_, c)| c.cycle == 0 && c.window.earliest > plan.days[0].date).find_map(|(j, c)| {
                plan.days
                    .iter()
                    .enumerate()
                    .find(|(k, o)| {
                        *k != i
                            && o.crew_load < o.crew_capacity
                            && o.date >= c.window.earliest
                            && c.window.latest.is_some_and(|l| o.date <= l)
                    })
                    .map(|(k, _)| (i, j, k))
            })
        })
        .expect("some change can move");
    let cell = plan.days[day].anode_changes[job].cell.clone();
    for _ in 0..day {
        f.s.press(Key::Down);
    }
    for _ in 0..job {
        f.s.press(Key::Right);
    }
    assert_eq!(f.s.app.selected_change().unwrap().cell, cell);
    f.s.press(Key::Char('m'));
    assert!(matches!(&f.s.app.overlay, Some(Overlay::PlanMove(c)) if *c == cell));
    while f.s.app.plan.day != target {
        f.s.press(if f.s.app.plan.day < target { Key::Down } else { Key::Up });
    }
    f.s.press(Key::Enter);
    assert!(matches!(&f.s.app.overlay, Some(Overlay::ConfirmKeep(c, _)) if *c == cell), "{:?}", f.s.app.overlay);
    f.s.press(Key::Char('n'));
    let p = f.s.app.plan.plan.clone().unwrap();
    let job = p.days[target].anode_changes.iter().position(|c| c.cell == cell && c.cycle == 0).expect("moved to the chosen day");
    assert!(p.days[target].anode_changes[job].moved);
    assert!(p.days.iter().all(|d| d.crew_load <= d.crew_capacity));
    // the first day is before the window opens: refused, with a notice, and the earlier move stays
    f.s.app.plan.day = target;
    f.s.app.plan.job = job;
    f.s.press(Key::Char('m'));
    while f.s.app.plan.day != 0 {
        f.s.press(Key::Up);
    }
    f.s.press(Key::Enter);
    assert!(matches!(&f.s.app.overlay, Some(Overlay::Notice(t)) if t.contains(&cell)), "{:?} {:?}", f.s.app.overlay, f.s.app.status);
    assert_eq!(f.s.app.plan.moves, vec![(cell.clone(), p.days[target].date)], "the refused move is taken back");
    f.s.press(Key::Esc);
    f.s.press(Key::Char('z'));
    assert!(f.s.app.plan.moves.is_empty());
}

#[test]
fn a_bad_crop_weight_in_the_anode_change_form_is_shown_beside_the_crop_field() {
    let mut f = session();
    start(&mut f);
    let due =
        f.s.app.cells.iter().find(|c| c.anode.as_ref().and_then(|a| a.pull_due).is_some_and(|t| t < f.s.app.day_end())).unwrap().clone();
    f.s.type_str(&format!("/{}", due.cell));
    f.s.press(Key::Enter);
    let a = due.anode.as_ref().unwrap();
    let scrap = format!("{:.0}", a.remaining_kg * f64::from(a.count));
    f.s.type_str("na");
    f.s.type_str(&scrap);
    f.s.press(Key::Tab);
    // a plausible scrap and an impossible crop: over 300 kg a cathode for 51 cathodes
    f.s.type_str("99999");
    f.s.press(Key::Tab);
    f.s.press(Key::Tab);
    f.s.type_str("381");
    f.s.press(Key::Enter);
    let Some(Overlay::Form(form)) = &f.s.app.overlay else { panic!("{:?}", f.s.app.overlay) };
    let err = |k: FieldKey| form.fields.iter().find(|x| x.key == k).unwrap().error.clone();
    assert!(err(FieldKey::CropKg).is_some_and(|e| e.contains("at most 15300")), "{form:?}");
    assert_eq!(err(FieldKey::TotalKg), None, "the scrap weight was fine");
    assert_eq!(form.fields[form.focus].key, FieldKey::CropKg, "the cursor goes to the crop field");
    assert!(screen(&f.s, 80, 24).contains("✗ 99999 kg is out of range"));
}

#[test]
fn help_scrolls_to_the_quit_key_at_80x24() {
    let mut f = session();
    start(&mut f);
    f.s.press(Key::Char('?'));
    let first = screen(&f.s, 80, 24);
    assert!(first.contains("previous cell") && !first.contains(" quit"), "{first}");
    for _ in 0..10 {
        f.s.press(Key::Char('j'));
    }
    let end = screen(&f.s, 80, 24);
    assert!(end.contains("q/Ctrl-C  quit"), "{end}");
    assert!(matches!(f.s.app.overlay, Some(Overlay::Help(_))), "scrolling keeps the help open");
    f.s.press(Key::Home);
    assert!(screen(&f.s, 80, 24).contains("Tankhouse screen"));
    f.s.press(Key::Char('q'));
    assert!(f.s.app.overlay.is_none() && !f.s.app.quit, "q closes the help, it does not quit");
}

/// 04:58 plant time (Madrid, UTC+1 in winter, IANA tz database) on 21 November:
/// still production day 11-20, which starts at 06:00, in its night shift.
fn night() -> Time {
    DateTime::parse_from_rfc3339("2026-11-21T03:58:00Z").unwrap().with_timezone(&Utc)
}

#[test]
fn the_night_shift_sees_the_coming_days_first_shift_work() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("plant.db");
    Plant::open(demo_db()).unwrap().backup(&path).unwrap();
    let mut s = Session::open(Plant::open(&path).unwrap(), night, false).unwrap();
    s.app.db_path = "demo.db".into();
    s.act(Action::Resize(80, 24));
    s.type_str("ak");
    s.press(Key::Enter);
    s.app.status = None;
    let coming = s.app.coming_shift().expect("the last shift of the day shows the next day's first shift");
    let zone = s.app.days.zone;
    assert_eq!((zone.show(coming.shift.start), zone.show(coming.shift.end)), ("2026-11-21 06:00".into(), "2026-11-21 18:00".into()));
    // what the header counts, counted here from the forecast: due from 06:00 to 18:00 on 11-21
    let within = |t: Option<Time>| t.is_some_and(|t| t >= coming.shift.start && t < coming.shift.end);
    let harvests = s.app.cells.iter().filter(|c| within(c.cathode.as_ref().and_then(|k| k.harvest_due))).count();
    assert_eq!(coming.harvests, harvests);
    assert!(coming.harvests + coming.anode_changes > 0, "the demo has work on the morning of 11-21");
    let text = screen(&s, 80, 24);
    assert!(text.lines().next().unwrap().contains("day 11-20 · night shift"), "{text}");
    assert!(text.lines().nth(1).unwrap().starts_with(" next day 11-21 06:00→18:00: "), "{text}");
    let wide = screen(&s, 160, 48);
    assert!(wide.lines().next().unwrap().contains("day 11-20 (06:00→06:00) · night shift"), "{wide}");
    assert!(wide.lines().nth(1).unwrap().contains("first shift (day shift) 06:00→18:00"), "{wide}");
    snap("night_shift_tankhouse", &s);
    s.press(Key::Char('p'));
    s.app.status = None;
    snap("night_shift_plan", &s);
}

#[test]
fn an_entry_that_did_not_save_is_kept_as_a_draft_when_the_terminal_goes() {
    let mut f = session();
    start(&mut f);
    f.s.type_str("/A05");
    f.s.press(Key::Enter);
    f.s.type_str("nt");
    f.s.type_str("2");
    f.s.press(Key::Enter);
    assert!(matches!(f.s.app.overlay, Some(Overlay::Review(_))), "{:?}", f.s.app.overlay);
    // the yes asks for a commit; the commit fails (a full disk, say)
    let Some(tankbook::tui::app::Effect::Commit(batch)) = f.s.app.update(Action::Input(Key::Char('y'))) else { panic!() };
    f.s.app.committed(batch, Err("disk I/O error".into()));
    assert!(f.s.app.unconfirmed_form().is_some(), "the form of the unsaved entry is kept");
    let id = f.s.keep_draft("the terminal was closed").expect("kept");
    let d = f.s.plant.drafts().unwrap();
    assert_eq!(d.iter().map(|d| (d.id, d.form.as_str())).collect::<Vec<_>>(), [(id, "shorts")]);
    assert!(d[0].fields.contains(&("count".to_string(), "2".to_string())), "{:?}", d[0].fields);
    // once it saves, nothing is left to keep
    f.s.press(Key::Esc);
    f.s.press(Key::Char('w'));
    assert!(f.s.app.unsaved.is_none() && f.s.app.unconfirmed_form().is_none());
}

// ---- the shift report key, the copper balance, kept moves, approvals, background backups ----

#[test]
fn the_report_key_writes_the_shift_report_and_says_where() {
    let mut f = session();
    start(&mut f);
    let folder = f.s.plant.path().parent().unwrap().join("reports");
    assert!(!folder.exists());
    f.s.press(Key::Char('R'));
    // written on a thread of its own: the keys do not wait for it
    assert!(f.s.finish_report(std::time::Duration::from_secs(30)), "the report is written");
    let status = f.s.app.status.clone().unwrap();
    assert!(!status.bad, "{status:?}");
    let path = PathBuf::from(status.text.strip_prefix("shift report written to ").expect("the status line names the file"));
    assert_eq!(path.parent().unwrap(), folder, "beside the database, in reports/");
    let html = std::fs::read_to_string(&path).unwrap();
    assert!(html.contains("<svg") && html.contains("</html>"), "a whole report with its charts");
    // the shift in progress at 05:30 UTC (06:30 Madrid) on 11-20 is the day shift, the first
    assert_eq!(path.file_name().unwrap(), "shift-2026-11-20-1.html");
    // the full path is also shown in a box, as the status line may be too narrow for it
    assert!(matches!(&f.s.app.overlay, Some(Overlay::Info(t)) if t.contains(&path.display().to_string())));
    f.s.press(Key::Char('x'));
    assert!(f.s.app.overlay.is_none());
}

#[test]
fn the_copper_balance_screen() {
    let mut f = session();
    start(&mut f);
    f.s.press(Key::Char('c'));
    assert_eq!(f.s.app.view, View::Balance);
    let (from, to) = f.s.plant.month_so_far(fixed()).unwrap();
    let want = f.s.plant.balance(from, to).unwrap();
    assert_eq!(f.s.app.balance.balance.as_ref(), Some(&want), "the screen shows the plant's balance of the month so far");
    f.s.app.status = None;
    for (w, h) in [(80, 24), (160, 48)] {
        let text = screen(&f.s, w, h);
        // every column and the line on how to read the residual fit
        for needed in ["R1", "R2", "plant", "RESIDUAL", "Faraday: electrolyte gain", "liberator cells, apart", "missing entries."] {
            assert!(text.contains(needed), "{w}x{h}: no {needed:?}\n{text}");
        }
        let residual = format!("{:.3}", want.plant.residual_t);
        assert!(text.lines().any(|l| l.starts_with("RESIDUAL") && l.trim_end().ends_with(&residual)), "{text}");
    }
    snap("balance", &f.s);
    f.s.press(Key::Char('b'));
    assert_eq!(f.s.app.view, View::Tankhouse);
}

/// A change of the running load that can move to another day inside its window: (day, job, target day).
fn movable(plan: &tankbook::domain::plan::Plan) -> (usize, usize, usize) {
    plan.days
        .iter()
        .enumerate()
        .find_map(|(i, d)| {
            d.anode_changes.iter().enumerate().filter(|(_, c)| c.cycle == 0 && c.window.earliest > plan.days[0].date).find_map(|(j, c)| {
                plan.days
                    .iter()
                    .enumerate()
                    .find(|(k, o)| {
                        *k != i
                            && *k < 14
                            && o.crew_load < o.crew_capacity
                            && o.date >= c.window.earliest
                            && c.window.latest.is_some_and(|l| o.date <= l)
                    })
                    .map(|(k, _)| (i, j, k))
            })
        })
        .expect("some change can move")
}

/// Moves the selected plan's change (day, job) to `target` with m … Enter; its cell.
fn move_change(s: &mut Session, (day, job, target): (usize, usize, usize)) -> String {
    s.app.plan.day = day;
    s.app.plan.job = job;
    let cell = s.app.selected_change().unwrap().cell.clone();
    s.press(Key::Char('m'));
    while s.app.plan.day != target {
        s.press(if s.app.plan.day < target { Key::Down } else { Key::Up });
    }
    s.press(Key::Enter);
    cell
}

fn plan_json(db: &std::path::Path) -> serde_json::Value {
    let out = std::process::Command::new(env!("CARGO_BIN_EXE_tankbook"))
        .env("TANKBOOK_DB", db)
        .env("TANKBOOK_NOW", "2026-11-20T05:30:00Z")
        .args(["plan", "--json"])
        .output()
        .unwrap();
    assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
    serde_json::from_slice(&out.stdout).unwrap()
}

#[test]
fn a_confirmed_plan_move_is_kept_for_later_plans() {
    let mut f = session();
    start(&mut f);
    f.s.press(Key::Char('p'));
    let plan = f.s.app.plan.plan.clone().unwrap();
    let at = movable(&plan);
    let date = plan.days[at.2].date;
    let cell = move_change(&mut f.s, at);
    assert!(matches!(&f.s.app.overlay, Some(Overlay::ConfirmKeep(c, d)) if *c == cell && *d == date), "{:?}", f.s.app.overlay);
    f.s.press(Key::Char('y'));
    let status = f.s.app.status.clone().unwrap();
    assert!(!status.bad && status.text.starts_with(&format!("kept: {cell} on {date} by AK")), "{status:?}");
    assert!(f.s.app.plan.moves.is_empty(), "the move is now a recorded decision, not a hand move of this screen");
    let kept = |p: &tankbook::domain::plan::Plan| p.kept_moves.iter().find(|k| k.cell == cell).cloned();
    let k = kept(f.s.app.plan.plan.as_ref().unwrap()).expect("the plan on screen keeps it");
    assert_eq!((k.date, k.by.as_str(), k.applied), (date, "AK", true));
    let p = f.s.app.plan.plan.clone().unwrap();
    assert!(p.days[at.2].anode_changes.iter().any(|c| c.cell == cell && c.moved), "on the chosen day");
    assert!(screen(&f.s, 160, 48).contains(&format!("kept: {cell} {} AK", date.format("%m-%d"))));
    // in the event log: the command line's plan lists it
    let json = plan_json(f.s.plant.path());
    let listed: Vec<&serde_json::Value> = json["kept_moves"].as_array().unwrap().iter().filter(|k| k["cell"] == cell.as_str()).collect();
    assert_eq!(listed.len(), 1, "{json}");
    assert_eq!((listed[0]["date"].as_str().unwrap(), listed[0]["by"].as_str().unwrap()), (date.to_string().as_str(), "AK"));
    assert_eq!(listed[0]["entry"].as_i64(), Some(k.entry));
    // it survives a reload and a new session
    f.s.press(Key::F(5));
    assert_eq!(kept(f.s.app.plan.plan.as_ref().unwrap()).map(|k| k.entry), Some(k.entry));
    let path = f.s.plant.path().to_path_buf();
    let mut again = Session::open(Plant::open(&path).unwrap(), fixed, false).unwrap();
    again.type_str("dt");
    again.press(Key::Enter);
    again.press(Key::Char('p'));
    assert_eq!(kept(again.app.plan.plan.as_ref().unwrap()).map(|k| k.entry), Some(k.entry));
    // a hand move of the same cell overrides the decision on this screen: the plan lists it as dropped, with the reason
    let p = again.app.plan.plan.clone().unwrap();
    let job = p.days[at.2].anode_changes.iter().position(|c| c.cell == cell).unwrap();
    assert_eq!(move_change(&mut again, (at.2, job, at.0)), cell);
    again.press(Key::Char('n'));
    let p = again.app.plan.plan.clone().unwrap();
    assert!(p.dropped_moves.iter().any(|d| d.entry == k.entry), "{:?}", p.dropped_moves);
    let wide = screen(&again, 160, 48);
    assert!(wide.contains(&format!("kept move dropped: {cell} {} (AK): ", date.format("%m-%d"))), "{wide}");
    again.press(Key::Char('z'));
    // undo takes the decision back like any entry
    again.press(Key::Char('u'));
    assert!(matches!(&again.app.overlay, Some(Overlay::ConfirmUndo(e)) if e.id == k.entry), "{:?}", again.app.overlay);
    again.press(Key::Char('y'));
    assert_eq!(kept(again.app.plan.plan.as_ref().unwrap()), None);
}

#[test]
fn approving_the_plan_then_the_changes_since_are_shown_at_the_top() {
    let mut f = session();
    start(&mut f);
    f.s.press(Key::Char('p'));
    assert!(screen(&f.s, 80, 24).lines().nth(2).unwrap().starts_with("no plan approved yet"), "{}", screen(&f.s, 80, 24));
    f.s.press(Key::Char('S'));
    assert!(matches!(f.s.app.overlay, Some(Overlay::ConfirmApprove)));
    assert!(screen(&f.s, 80, 24).contains("signed AK"));
    f.s.press(Key::Char('n'));
    assert!(f.s.app.plan.plan.as_ref().unwrap().since_approved.is_none(), "n approves nothing");
    f.s.press(Key::Char('S'));
    f.s.press(Key::Char('y'));
    assert!(f.s.app.status.as_ref().unwrap().text.starts_with("plan approved by AK"), "{:?}", f.s.app.status);
    let d = f.s.app.plan.plan.as_ref().unwrap().since_approved.clone().expect("approved");
    assert!(d.is_empty() && d.by == "AK", "{d:?}");
    assert!(screen(&f.s, 80, 24).lines().nth(2).unwrap().starts_with("no change since the plan AK approved 11-20 06:30"));
    // a hand move after the approval is what the morning meeting sees first
    let plan = f.s.app.plan.plan.clone().unwrap();
    let at = movable(&plan);
    let from = plan.days[at.0].date;
    let to = plan.days[at.2].date;
    let cell = move_change(&mut f.s, at);
    f.s.press(Key::Char('n'));
    let d = f.s.app.plan.plan.as_ref().unwrap().since_approved.clone().unwrap();
    assert!(d.moved.iter().any(|m| m.cell == cell && m.from == from && m.to == to), "{d:?}");
    let top = screen(&f.s, 80, 24).lines().nth(2).unwrap().to_string();
    assert!(top.starts_with(&format!("since AK's approval 11-20 06:30: {} moved, ", d.moved.len())), "{top}");
    let wide = screen(&f.s, 160, 48);
    assert!(wide.contains(&format!("{cell} anodes {}→{}", from.format("%m-%d"), to.format("%m-%d"))), "{wide}");
    assert!(wide.lines().nth(1).unwrap().starts_with("ADVISORY plan"), "the advisory line stays first");
}

/// A plant that is not the demo (the demo is never backed up): the plant check's
/// layout, a day of current and a load in A01, entered through the plant API (no backup yet).
fn march() -> Time {
    DateTime::parse_from_rfc3339("2026-03-02T00:00:00Z").unwrap().with_timezone(&Utc)
}

fn backups_in(dir: &std::path::Path) -> Vec<String> {
    match std::fs::read_dir(dir.join("backups")) {
        // the database files themselves (a copy opened here has its journal files beside it)
        Ok(r) => r.map(|e| e.unwrap().file_name().to_string_lossy().into_owned()).filter(|n| n.ends_with(".db")).collect(),
        Err(_) => Vec::new(),
    }
}

#[test]
fn the_daily_backup_is_made_in_the_background_after_a_commit_never_after_a_draft() {
    use tankbook::domain::entry::Entry;
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("plant.db");
    let mut plant = Plant::open(&path).unwrap();
    let layout = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("fixtures/plant_check.toml");
    plant.load_layout_file(&layout, march()).unwrap();
    let mut csv = String::from("time,circuit,amps\n");
    for h in 0..=24 {
        csv.push_str(&format!("{},C1,30000\n", (march() - chrono::Duration::hours(24 - h)).to_rfc3339()));
    }
    plant.import_current(csv.as_bytes(), "test", march()).unwrap();
    let set = march() - chrono::Duration::hours(24);
    let opts = tankbook::plant::Opts { by: "JD".into(), force: false, now: march() };
    plant.record(&Entry::Anodes { cell: "A01".into(), at: set, count: 50, mean_kg: 380.0 }, &opts).unwrap();
    let mut s = Session::open(plant, march, false).unwrap();
    s.act(Action::Resize(80, 24));
    s.type_str("ak");
    s.press(Key::Enter);
    // a form typed and kept as a draft (the terminal went away): no backup
    s.type_str("/A01");
    s.press(Key::Enter);
    s.type_str("nt");
    s.type_str("2");
    assert!(s.keep_draft("the terminal was closed").is_some());
    assert!(s.finish_backups(std::time::Duration::from_secs(10)));
    assert!(backups_in(dir.path()).is_empty(), "a draft starts no backup");
    // the same entry recorded: the day's backup follows in the background
    s.press(Key::Enter);
    assert!(matches!(s.app.overlay, Some(Overlay::Review(_))), "{:?}", s.app.overlay);
    s.press(Key::Char('y'));
    assert!(s.app.status.as_ref().unwrap().text.starts_with("recorded shorts for A01"), "{:?}", s.app.status);
    assert!(s.finish_backups(std::time::Duration::from_secs(30)), "the backup ends");
    // production day 03-01 (days start 06:00 UTC)
    assert_eq!(backups_in(dir.path()), ["plant-2026-03-01.db"]);
    let status = s.app.status.clone().unwrap();
    assert!(
        status.text.starts_with("recorded shorts for A01") && status.text.ends_with(" · today's backup made: backups/plant-2026-03-01.db"),
        "{status:?}"
    );
    assert!(!s.poll_backups(), "one result per backup");
    // the backup is a whole database holding the entry
    let copy = Plant::open(&dir.path().join("backups/plant-2026-03-01.db")).unwrap();
    assert_eq!(copy.recent_events(Some("A01"), 1).unwrap()[0].kind.name(), "shorts");
    // an undo commits too: with the day's backup gone, it is made again
    std::fs::remove_file(dir.path().join("backups/plant-2026-03-01.db")).unwrap();
    s.press(Key::Char('u'));
    s.press(Key::Char('y'));
    assert!(s.app.status.as_ref().unwrap().text.starts_with("undid entry"), "{:?}", s.app.status);
    assert!(s.finish_backups(std::time::Duration::from_secs(30)));
    assert_eq!(backups_in(dir.path()), ["plant-2026-03-01.db"]);
}

#[test]
fn snapshots_of_the_learning_views() {
    let mut f = session();
    start(&mut f);
    f.s.type_str("/A09");
    f.s.press(Key::Enter);
    f.s.press(Key::Enter);
    f.s.app.status = None;
    f.s.press(Key::Tab);
    snap("cell_weighings", &f.s);
    f.s.press(Key::Char('s'));
    assert_eq!(f.s.app.view, View::Patrol);
    snap("patrol", &f.s);
    f.s.press(Key::Char('f'));
    assert_eq!(f.s.app.view, View::Accuracy);
    snap("accuracy", &f.s);
}

#[test]
fn the_patrol_view_opens_the_selected_cell() {
    let mut f = session();
    start(&mut f);
    assert!(f.s.app.patrol.patrol.is_none(), "the patrol is read only when its view opens");
    f.s.press(Key::Char('s'));
    let list = f.s.plant.patrol(fixed()).unwrap();
    let shown = f.s.app.patrol.patrol.clone().expect("the patrol list is loaded when the view opens");
    assert_eq!(shown, list);
    assert!(list.cells.windows(2).all(|w| w[0].score >= w[1].score), "most suspect first");
    // the fourth most suspect cell, chosen with the keys
    f.s.press(Key::Char('j'));
    f.s.press(Key::Down);
    f.s.press(Key::Char('k'));
    f.s.press(Key::Char('j'));
    f.s.press(Key::Char('j'));
    let fourth = list.cells[3].cell.clone();
    assert_ne!(f.s.app.selected().unwrap().cell, fourth, "not the cell the tankhouse had selected already");
    assert_eq!(f.s.app.patrol.selected().unwrap().cell, fourth);
    assert!(screen(&f.s, 80, 24).contains(&fourth));
    f.s.press(Key::Enter);
    assert_eq!(f.s.app.view, View::Cell);
    assert_eq!(f.s.app.selected().unwrap().cell, fourth);
    assert_eq!(f.s.app.cell.detail.as_ref().unwrap().forecast.cell, fourth);
    assert_eq!(f.s.app.cell.backtest.as_ref().unwrap().0, fourth, "its weighings are loaded with it");
    assert!(screen(&f.s, 80, 24).lines().nth(1).unwrap().starts_with(&fourth));
}

#[test]
fn the_cell_view_shows_what_it_learnt_and_how_it_predicted() {
    let mut f = session();
    start(&mut f);
    f.s.type_str("/A09");
    f.s.press(Key::Enter);
    f.s.press(Key::Enter);
    let c = forecast_of(&f.s, "A09");
    assert_eq!(c.cathode_efficiency_source.name(), "cell", "the demo's A09 has crops of its own");
    let learnt = format!(
        "Cathode η {:.1} % ±{:.1} · cell · {} crops",
        c.cathode_efficiency * 100.0,
        c.cathode_efficiency_se * 100.0,
        c.crops_learnt
    );
    let anode =
        format!("Anode ×{:.3} ±{:.3} · {} · {} scrap", c.anode_factor, c.anode_factor_se, c.anode_factor_source.name(), c.scrap_learnt);
    let text = screen(&f.s, 80, 24);
    assert!(text.contains(&learnt), "{learnt}\n{text}");
    assert!(text.contains(&anode), "{anode}\n{text}");
    let wide = screen(&f.s, 160, 48);
    assert!(wide.contains(&format!("· cell · {} crops learnt", c.crops_learnt)), "{wide}");
    // its last crop's back-test row: weighed and predicted kg, beside the charts on a wide screen, on Tab at 80
    let bt = f.s.plant.backtest(None, fixed(), Some("A09")).unwrap();
    let last = bt.crops.last().unwrap();
    let row = format!("{:>5.0} {:>5.0} {:>+5.1} {:>+5.1}", last.weighed_kg, last.predicted_kg, last.error_pct, last.fixed_error_pct);
    assert!(!text.contains(&row), "the charts first at 80 columns");
    f.s.press(Key::Tab);
    let text = screen(&f.s, 80, 24);
    assert!(text.contains(&row), "{row}\n{text}");
    assert!(
        text.contains(&format!(
            "{} crops: error {:.2} %, fixed η {:.2} %",
            bt.summary.crops,
            bt.summary.mass_mape_pct.unwrap(),
            bt.summary.fixed_mass_mape_pct.unwrap()
        )),
        "{text}"
    );
    assert!(wide.contains(&format!("{:>7.0} {:>9.0} {:>6.0}", last.weighed_kg, last.predicted_kg, last.fixed_kg)), "{wide}");
    f.s.press(Key::Tab);
    assert!(!f.s.app.cell.weighings, "Tab goes back to the charts");
}

#[test]
fn a_weighing_left_out_of_learning_says_why_on_the_cell_view() {
    let mut f = session();
    start(&mut f);
    // A09's crop weighed at 15 % over what its charge can plate: over 100 % efficiency
    let c = forecast_of(&f.s, "A09");
    let kg = (c.cathode.as_ref().unwrap().mass_kg * 51.0 / c.cathode_efficiency * 1.15).round();
    let entry = tankbook::domain::entry::Entry::Harvest { cell: "A09".into(), at: fixed(), total_kg: kg };
    f.s.plant.record_batch(&[(entry, tankbook::plant::Opts { by: "AK".into(), force: true, now: fixed() })]).unwrap();
    f.s.perform(tankbook::tui::app::Effect::Reload);
    f.s.type_str("/A09");
    f.s.press(Key::Enter);
    f.s.press(Key::Enter);
    f.s.press(Key::Tab);
    let why = f.s.app.selected().unwrap().warnings.iter().find(|w| w.code == "weighing_not_learnt").expect("left out").message.clone();
    assert!(why.contains("is impossible"), "{why}");
    // the sentence is wrapped in the panel: its words are all on the screen, in order
    let text = screen(&f.s, 160, 48);
    let panel: Vec<String> = text.lines().map(|l| l.chars().skip(57).take_while(|c| *c != '│').collect()).collect();
    let flat = panel.join(" ").split_whitespace().collect::<Vec<_>>().join(" ");
    assert!(flat.contains("the crop weighed at"), "{text}");
    assert!(flat.contains("is impossible: it is kept in the log but not learnt from"), "{text}");
}

#[test]
fn the_accuracy_view_sets_the_learnt_rule_against_the_fixed_one_and_follows_new_weighings() {
    let mut f = session();
    start(&mut f);
    assert!(f.s.app.accuracy.backtest.is_none(), "the back-test runs only when its view opens");
    f.s.press(Key::Char('f'));
    let bt = f.s.plant.backtest(None, fixed(), None).unwrap();
    assert_eq!(f.s.app.accuracy.backtest.as_ref().unwrap().summary, bt.summary);
    let s = bt.summary;
    assert!(s.mass_mape_pct.unwrap() < s.fixed_mass_mape_pct.unwrap(), "the demo's learnt rule beats the fixed one");
    let text = screen(&f.s, 80, 24);
    assert!(text.contains(&format!("mass error       {:.2} % learnt", s.mass_mape_pct.unwrap())), "{text}");
    assert!(text.contains(&format!("{:.2} % fixed η", s.fixed_mass_mape_pct.unwrap())), "{text}");
    // the sections' rows add up to the plant's, and each matches its own rows
    let sections = &f.s.app.accuracy.sections;
    assert_eq!(sections.iter().map(|x| x.2.crops).sum::<usize>(), s.crops);
    assert_eq!(sections.iter().map(|x| x.2.scrap).sum::<usize>(), s.scrap);
    let a: Vec<f64> = bt.crops.iter().filter(|r| r.section == "A").map(|r| r.error_pct.abs()).collect();
    let a_mape = a.iter().sum::<f64>() / a.len() as f64;
    let row = sections.iter().find(|x| x.1 == "A").unwrap();
    assert!((row.2.mass_mape_pct.unwrap() - a_mape).abs() < 1e-9);
    assert!(text.contains(&format!("A    {:>5} {:>6.2}", a.len(), a_mape)), "{text}");
    // a weighing logged while the view is open is in it after the reload
    let c = forecast_of(&f.s, "A09");
    let kg = (c.cathode.unwrap().mass_kg * 51.0 * 0.99).round();
    let entry = tankbook::domain::entry::Entry::Harvest { cell: "A09".into(), at: fixed(), total_kg: kg };
    f.s.plant.record_batch(&[(entry, tankbook::plant::Opts { by: "AK".into(), force: true, now: fixed() })]).unwrap();
    f.s.press(Key::F(5));
    assert_eq!(f.s.app.accuracy.backtest.as_ref().unwrap().summary.crops, s.crops + 1);
}

// ---- the incremental refresh after an entry ----

/// A small deterministic generator (xorshift64*, Vigna 2016): the same "random" entries every run.
struct Rng(u64);

impl Rng {
    fn next(&mut self) -> u64 {
        self.0 ^= self.0 >> 12;
        self.0 ^= self.0 << 25;
        self.0 ^= self.0 >> 27;
        self.0.wrapping_mul(0x2545_F491_4F6C_DD1D)
    }
    fn below(&mut self, n: usize) -> usize {
        (self.next() % n as u64) as usize
    }
    fn unit(&mut self) -> f64 {
        (self.next() >> 11) as f64 / (1u64 << 53) as f64
    }
}

/// One random write through the screens' effects: an entry of any kind (forced
/// past questions; a refused one changes nothing), a typed reading, or an undo.
fn random_write(s: &mut Session, rng: &mut Rng) -> String {
    use tankbook::domain::entry::Entry;
    use tankbook::tui::app::Effect;
    let cells = s.app.cells.clone();
    let c = &cells[rng.below(cells.len())];
    let circuit = s.app.circuits[rng.below(s.app.circuits.len())].clone();
    let ago = |rng: &mut Rng, max_min: usize| fixed() - chrono::Duration::minutes(1 + rng.below(max_min) as i64);
    let cell = c.cell.clone();
    let entry = match rng.below(11) {
        0 => Entry::Voltage { cell, at: ago(rng, 600), volts: 0.20 + 0.15 * rng.unit() },
        1 => Entry::Shorts { cell, at: ago(rng, 600), count: 1 + rng.below(3) as u32 },
        2 => {
            let kg = c.cathode.as_ref().map_or(4000.0, |k| k.mass_kg) * (0.9 + 0.15 * rng.unit());
            Entry::Harvest { cell, at: ago(rng, 120), total_kg: kg.round() }
        }
        3 => {
            let kg = c.anode.as_ref().map_or(3000.0, |a| a.remaining_kg) * (0.9 + 0.2 * rng.unit());
            Entry::Scrap { cell, at: ago(rng, 120), total_kg: kg.round() }
        }
        4 => Entry::Cutout { cell, from: ago(rng, 300), to: if rng.below(2) == 0 { None } else { Some(fixed()) } },
        5 => {
            let from = ago(rng, 900);
            Entry::Outage { circuit, from, to: from + chrono::Duration::minutes(5 + rng.below(60) as i64) }
        }
        6 => Entry::Setpoint { circuit, from: ago(rng, 600), amps: (28_000 + rng.below(6000)) as f64 },
        7 => {
            let at = ago(rng, 600);
            let amps = (28_000 + rng.below(6000)) as f64;
            s.perform(Effect::ImportReading { circuit: circuit.clone(), at, amps, by: "AK".into() });
            return format!("reading {amps} A on {circuit} at {at}");
        }
        8 => Entry::Anodes {
            cell,
            at: ago(rng, 120),
            count: c.anode.as_ref().map_or(40, |a| a.count),
            mean_kg: (330 + rng.below(60)) as f64,
        },
        _ => {
            let newest = s
                .plant
                .recent_events(None, 50)
                .unwrap()
                .into_iter()
                .find(|e| e.kind != tankbook::domain::history::EventKind::Void && !e.voided);
            let Some(e) = newest else { return "nothing to undo".into() };
            s.perform(Effect::Undo(e.id));
            return format!("undo of entry {} ({})", e.id, e.kind.name());
        }
    };
    let what = format!("{entry:?}");
    let opts = tankbook::plant::Opts { by: "AK".into(), force: true, now: fixed() };
    s.perform(Effect::Commit(vec![(entry, opts)]));
    what
}

#[test]
fn an_incremental_refresh_equals_a_full_forecast() {
    let mut f = session();
    start(&mut f);
    let mut rng = Rng(0x5eed_1234_abcd_0011);
    let mut kinds = std::collections::BTreeMap::new();
    for step in 0..40 {
        f.s.app.status = None;
        let what = random_write(&mut f.s, &mut rng);
        let said = f.s.app.status.clone().map(|s| s.text).unwrap_or_default();
        eprintln!("step {step}: {what} → {said}");
        if !f.s.app.status.as_ref().is_some_and(|s| s.bad) {
            *kinds.entry(what.split([' ', '{']).next().unwrap_or("").to_string()).or_insert(0) += 1;
        }
        let full = f.s.plant.forecast(fixed(), None).unwrap();
        assert_eq!(f.s.app.as_of, full.as_of, "step {step}: {what}");
        assert_eq!(f.s.app.cells.len(), full.cells.len(), "step {step}: {what}");
        for (mine, fresh) in f.s.app.cells.iter().zip(&full.cells) {
            assert_eq!(mine, fresh, "step {step}, after {what}: {} differs from a full forecast", fresh.cell);
        }
        assert_eq!(f.s.app.plant_warnings, full.warnings, "step {step}, after {what}: the circuits' warnings");
    }
    eprintln!("{kinds:?}");
    assert!(kinds.len() >= 8 && kinds.get("undo").is_some_and(|n| *n >= 3), "most kinds were recorded, and undone: {kinds:?}");
}

#[test]
fn in_the_terminal_a_slower_panel_is_read_elsewhere_after_the_frame() {
    let mut f = session();
    f.s.defer = true;
    start(&mut f);
    f.s.press(Key::Char('s'));
    assert!(f.s.app.patrol.patrol.is_none() && f.s.busy(), "the patrol is read on the worker thread; the keys do not wait");
    assert!(screen(&f.s, 80, 24).contains("updating…"), "and the status line says the screen is about to change");
    assert!(f.s.settle(std::time::Duration::from_secs(60)));
    assert_eq!(f.s.app.patrol.patrol, Some(f.s.plant.patrol(fixed()).unwrap()));
    assert!(!f.s.busy() && !f.s.app.updating);
    // a load for a screen left before it came is dropped (it is read again when the screen opens)
    f.s.press(Key::Char('p'));
    f.s.press(Key::Char('t'));
    assert!(f.s.settle(std::time::Duration::from_secs(60)));
    assert!(f.s.app.plan.plan.is_none());
    // one asked before a write is asked afresh: the plan shown holds the entry
    f.s.press(Key::Char('p'));
    let entry = tankbook::domain::entry::Entry::Shorts { cell: "A03".into(), at: fixed(), count: 2 };
    f.s.perform(tankbook::tui::app::Effect::Commit(vec![(entry, tankbook::plant::Opts { by: "AK".into(), force: true, now: fixed() })]));
    assert!(f.s.settle(std::time::Duration::from_secs(60)));
    let opts = tankbook::plant::PlanOptions { days: f.s.app.plan.days, ..Default::default() };
    assert_eq!(f.s.app.plan.plan, Some(f.s.plant.plan(&opts, fixed()).unwrap()));
}

#[test]
fn esc_from_a_cell_opened_from_the_patrol_goes_back_to_the_patrol() {
    let mut f = session();
    start(&mut f);
    f.s.press(Key::Char('s'));
    f.s.press(Key::Enter);
    assert_eq!(f.s.app.view, View::Cell);
    f.s.press(Key::Esc);
    assert_eq!(f.s.app.view, View::Patrol);
    f.s.press(Key::Esc);
    assert_eq!(f.s.app.view, View::Tankhouse);
    // opened from the tankhouse, it goes back there
    f.s.press(Key::Enter);
    f.s.press(Key::Esc);
    assert_eq!(f.s.app.view, View::Tankhouse);
}

#[test]
fn what_an_entry_touches_is_its_section_or_its_circuit() {
    let f = session();
    let p = &f.s.plant;
    let t = p.touched_by_entries(&[tankbook::domain::entry::Entry::Shorts { cell: "A03".into(), at: fixed(), count: 1 }]).unwrap();
    let section_a: Vec<String> = f.s.app.cells.iter().filter(|c| c.section == "A").map(|c| c.cell.clone()).collect();
    assert_eq!(t.cells.iter().cloned().collect::<Vec<_>>(), section_a, "a cell entry: its section (learnt and ranked together)");
    assert_eq!(t.circuits.iter().cloned().collect::<Vec<_>>(), vec!["R1".to_string()]);
    let t = p.touched_by_circuit("R2").unwrap();
    let r2: Vec<String> = f.s.app.cells.iter().filter(|c| c.circuit == "R2").map(|c| c.cell.clone()).collect();
    let mut touched: Vec<String> = t.cells.into_iter().collect();
    touched.sort();
    let mut want = r2;
    want.sort();
    assert_eq!(touched, want, "a circuit entry: every cell on the circuit");
}

#[test]
fn the_first_frame_holds_a_screenful_of_whole_sections_and_the_whole_plant_follows() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("plant.db");
    Plant::open(demo_db()).unwrap().backup(&path).unwrap();
    let mut s = Session::open_first(Plant::open(&path).unwrap(), fixed, false, 30).unwrap();
    s.act(Action::Resize(80, 24));
    let full = s.plant.forecast(fixed(), None).unwrap();
    // the demo's sections hold 24 cells: two of them cover 30 tiles
    assert!(s.app.partial && s.has_pending());
    assert_eq!(s.app.cells, full.cells[..48].to_vec(), "whole sections, as the whole plant's forecast has them");
    let first = screen(&s, 80, 24);
    assert!(first.contains("A01") && first.contains("reading the whole plant…"), "{first}");
    assert!(!first.contains("due by"), "no plant-wide count from part of the plant");
    // the first key waits for the whole plant
    s.type_str("ak");
    assert!(!s.app.partial && !s.has_pending());
    assert_eq!(s.app.cells, full.cells);
    assert_eq!(s.app.plant_warnings, full.warnings);
    s.press(Key::Enter);
    assert_eq!(s.app.who.as_deref(), Some("AK"));
    assert!(screen(&s, 80, 24).contains("due by"));
    // a plant no bigger than a screenful is forecast once, whole
    let s = Session::open_first(Plant::open(&path).unwrap(), fixed, false, 200).unwrap();
    assert!(!s.app.partial && !s.busy());
    assert_eq!(s.app.cells, s.plant.forecast(fixed(), None).unwrap().cells);
    assert_eq!(s.app.plant_warnings, s.plant.forecast(fixed(), None).unwrap().warnings);
}
