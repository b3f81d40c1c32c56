//! Every key of every screen, in one table per screen: the handlers resolve
//! keys through these tables and the help and hint bar are printed from them,
//! so the help can never drift from what the keys do.

use super::app::{Action, View};

/// A key as the tables name it.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Key {
    Char(char),
    Up,
    Down,
    Left,
    Right,
    Enter,
    Esc,
    Tab,
    BackTab,
    PageUp,
    PageDown,
    Home,
    End,
    Backspace,
    F(u8),
    /// Ctrl-C: ends the screens at once, keeping a form being typed as a draft.
    CtrlC,
}

impl Key {
    pub fn label(self) -> String {
        match self {
            Key::Char(' ') => "Space".into(),
            Key::Char(c) => c.to_string(),
            Key::Up => "↑".into(),
            Key::Down => "↓".into(),
            Key::Left => "←".into(),
            Key::Right => "→".into(),
            Key::Enter => "Enter".into(),
            Key::Esc => "Esc".into(),
            Key::Tab => "Tab".into(),
            Key::BackTab => "S-Tab".into(),
            Key::PageUp => "PgUp".into(),
            Key::PageDown => "PgDn".into(),
            Key::Home => "Home".into(),
            Key::End => "End".into(),
            Key::Backspace => "Bksp".into(),
            Key::F(n) => format!("F{n}"),
            Key::CtrlC => "Ctrl-C".into(),
        }
    }
}

/// One row of a key table.
pub struct Binding {
    pub keys: &'static [Key],
    pub action: Action,
    pub help: &'static str,
    /// The short label in the hint bar, for the main keys (all keys are in the help).
    pub hint: Option<&'static str>,
}

const fn b(keys: &'static [Key], action: Action, help: &'static str, hint: Option<&'static str>) -> Binding {
    Binding { keys, action, help, hint }
}

use Key::*;

/// Keys every screen shares (after the screen's own).
pub const GLOBAL: &[Binding] = &[
    b(&[Char('n')], Action::EntryMenu, "new shift-log entry (harvest, anodes, scrap, …)", Some("new entry")),
    b(&[Char('u')], Action::UndoLast, "undo the newest entry (asks first)", Some("undo")),
    b(&[Char('t')], Action::ShowView(View::Tankhouse), "tankhouse: every cell", None),
    b(&[Char('r')], Action::ShowView(View::Rectifier), "rectifiers: circuit current", None),
    b(&[Char('e')], Action::ShowView(View::Entries), "entries: the event log", None),
    b(&[Char('p')], Action::ShowView(View::Plan), "plan: anode changes and harvests, day by day", Some("plan")),
    b(&[Char('c')], Action::ShowView(View::Balance), "copper balance: the month so far, per circuit and plant", None),
    b(&[Char('R')], Action::ShiftReport, "write the shift report (printable HTML) and say where", None),
    b(&[Char('s')], Action::ShowView(View::Patrol), "patrol: the cells to check for shorts, most suspect first", None),
    b(&[Char('f')], Action::ShowView(View::Accuracy), "forecast accuracy: predictions against weighings", None),
    b(&[Char('i')], Action::AskInitials, "change who is logging (initials)", None),
    b(&[Char('w')], Action::RetryUnsaved, "retry saving an entry that did not save", None),
    b(&[F(5)], Action::Reload, "reload from the database", None),
    b(&[Char('?')], Action::Help, "help: every key of this screen", Some("help")),
    b(&[Char('q'), CtrlC], Action::Quit, "quit (Ctrl-C also in a form: the form is kept as a draft)", Some("quit")),
];

pub const TANKHOUSE: &[Binding] = &[
    b(&[Left, Char('h')], Action::Move(-1, 0), "previous cell", None),
    b(&[Right, Char('l')], Action::Move(1, 0), "next cell", None),
    b(&[Up, Char('k')], Action::Move(0, -1), "cell above", None),
    b(&[Down, Char('j')], Action::Move(0, 1), "cell below", None),
    b(&[PageUp], Action::Page(-1), "page up", None),
    b(&[PageDown], Action::Page(1), "page down", None),
    b(&[Tab], Action::Section(1), "next section", None),
    b(&[BackTab], Action::Section(-1), "previous section", None),
    b(&[Enter], Action::OpenCell, "open the cell", Some("cell")),
    b(&[Char('d')], Action::NextDue, "next cell due today (harvest, anodes, thin anodes)", Some("next due")),
    b(&[Char('/'), Char('g')], Action::StartJump, "go to a cell: type its id, then Enter", Some("go to")),
    b(&[Char('L')], Action::Legend, "legend of the cell symbols", Some("legend")),
];

pub const CELL: &[Binding] = &[
    b(&[Left, Char('h')], Action::Move(-1, 0), "previous cell", None),
    b(&[Right, Char('l')], Action::Move(1, 0), "next cell", None),
    b(&[Esc, Char('b')], Action::Back, "back to the tankhouse, or to the patrol list it was opened from", Some("back")),
    b(&[Char('L')], Action::Legend, "legend of the cell symbols", None),
    b(&[Tab], Action::CellWeighings, "predictions against weighings in full, or the charts", Some("weighings")),
];

pub const RECTIFIER: &[Binding] = &[
    b(&[Up, Char('k')], Action::Move(0, -1), "previous circuit", None),
    b(&[Down, Char('j')], Action::Move(0, 1), "next circuit", None),
    b(&[Left, Char('h')], Action::Span(-1), "shorter time span", Some("span")),
    b(&[Right, Char('l')], Action::Span(1), "longer time span", None),
    b(&[Esc, Char('b')], Action::Back, "back to the tankhouse", Some("back")),
];

pub const ENTRIES: &[Binding] = &[
    b(&[Up, Char('k')], Action::Move(0, -1), "previous entry", None),
    b(&[Down, Char('j')], Action::Move(0, 1), "next entry", None),
    b(&[Char('x')], Action::UndoSelected, "undo the selected entry (asks first)", Some("undo this")),
    b(&[Esc, Char('b')], Action::Back, "back to the tankhouse", Some("back")),
];

pub const PLAN: &[Binding] = &[
    b(&[Up, Char('k')], Action::Move(0, -1), "previous day", None),
    b(&[Down, Char('j')], Action::Move(0, 1), "next day", None),
    b(&[Left, Char('h')], Action::PlanJob(-1), "previous job of the day", None),
    b(&[Right, Char('l')], Action::PlanJob(1), "next job of the day", None),
    b(&[Char('m')], Action::PlanMove, "move the selected anode change to another day (re-checked)", Some("move")),
    b(&[Char('z')], Action::PlanReset, "drop the moves made by hand (kept ones stay: undo takes them back)", None),
    b(&[Char('S')], Action::PlanApprove, "sign the plan as approved, with your initials (asks first)", Some("approve")),
    b(&[Esc, Char('b')], Action::Back, "back to the tankhouse", Some("back")),
];

pub const BALANCE: &[Binding] = &[b(&[Esc, Char('b')], Action::Back, "back to the tankhouse", Some("back"))];

pub const PATROL: &[Binding] = &[
    b(&[Up, Char('k')], Action::Move(0, -1), "more suspect cell", None),
    b(&[Down, Char('j')], Action::Move(0, 1), "less suspect cell", None),
    b(&[Enter], Action::OpenPatrolCell, "open the selected cell", Some("cell")),
    b(&[Esc, Char('b')], Action::Back, "back to the tankhouse", Some("back")),
];

pub const ACCURACY: &[Binding] = &[b(&[Esc, Char('b')], Action::Back, "back to the tankhouse", Some("back"))];

/// The table of a screen.
pub fn table(view: View) -> &'static [Binding] {
    match view {
        View::Tankhouse => TANKHOUSE,
        View::Cell => CELL,
        View::Rectifier => RECTIFIER,
        View::Entries => ENTRIES,
        View::Plan => PLAN,
        View::Balance => BALANCE,
        View::Patrol => PATROL,
        View::Accuracy => ACCURACY,
    }
}

/// Resolves a key on a screen: the screen's own table first, then the shared keys.
pub fn resolve(view: View, key: Key) -> Option<Action> {
    table(view).iter().chain(GLOBAL).find(|b| b.keys.contains(&key)).map(|b| b.action)
}

/// The labels of a binding's keys, e.g. "←/h".
pub fn keys_label(b: &Binding) -> String {
    b.keys.iter().map(|k| k.label()).collect::<Vec<_>>().join("/")
}

/// The hint bar's items for a screen: the first key of each main binding (the
/// help lists all of them).
pub fn hints(view: View) -> Vec<(String, &'static str)> {
    table(view).iter().chain(GLOBAL).filter_map(|b| Some((b.keys.first()?.label(), b.hint?))).collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn no_key_is_bound_twice_on_a_screen() {
        for view in [View::Tankhouse, View::Cell, View::Rectifier, View::Entries, View::Plan, View::Balance, View::Patrol, View::Accuracy] {
            let all: Vec<Key> = table(view).iter().chain(GLOBAL).flat_map(|b| b.keys.iter().copied()).collect();
            for (i, k) in all.iter().enumerate() {
                assert!(!all[i + 1..].contains(k), "{view:?}: {k:?} is bound twice");
            }
        }
    }

    #[test]
    fn no_key_is_bound_twice_on_the_learning_screens() {
        for view in [View::Patrol, View::Accuracy, View::Cell] {
            let all: Vec<Key> = table(view).iter().chain(GLOBAL).flat_map(|b| b.keys.iter().copied()).collect();
            for (i, k) in all.iter().enumerate() {
                assert!(!all[i + 1..].contains(k), "{view:?}: {k:?} is bound twice");
            }
        }
        assert_eq!(resolve(View::Patrol, Key::Enter), Some(Action::OpenPatrolCell));
        assert_eq!(resolve(View::Tankhouse, Key::Char('s')), Some(Action::ShowView(View::Patrol)));
    }

    #[test]
    fn help_and_handlers_share_the_table() {
        assert_eq!(resolve(View::Tankhouse, Key::Char('j')), Some(Action::Move(0, 1)));
        assert_eq!(resolve(View::Cell, Key::Esc), Some(Action::Back));
        assert_eq!(resolve(View::Tankhouse, Key::Esc), None);
        assert!(hints(View::Tankhouse).iter().any(|(k, _)| k == "?"));
    }
}
