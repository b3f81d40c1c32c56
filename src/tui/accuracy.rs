//! The accuracy screen: the plant's back-test, each weighed crop's predicted
//! mass against the weighed one, the error by section and the learnt rule against the fixed one.

use ratatui::Frame;
use ratatui::layout::{Constraint, Layout, Rect};
use ratatui::style::Color;
use ratatui::symbols::Marker;
use ratatui::text::Line;
use ratatui::widgets::{Axis, Block, Borders, Chart, Dataset, GraphType, Paragraph, Wrap};

use std::collections::BTreeMap;
use std::ops::ControlFlow;

use super::app::App;
use super::draw::{bold, fg};
use crate::domain::backtest::{CropRow, Name, ScrapRow, Summary, SummaryAcc};
use crate::domain::charge::Time;
use crate::plant::{BacktestSink, Plant, PlantError};

/// The accuracy screen's state: what it draws of the back-test and its summary per section.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct AccuracyScreen {
    pub backtest: Option<AccuracyView>,
    /// (circuit, section, the summary of its rows), in plant order.
    pub sections: Vec<(String, String, Summary)>,
}

/// What the chart and the figures draw of the plant's back-test (not its rows).
#[derive(Debug, Clone, PartialEq)]
pub struct AccuracyView {
    pub summary: Summary,
    /// Each crop's weighed kg against its learnt prediction, in the rows' order.
    pub learnt: Vec<(f64, f64)>,
    /// Each crop's weighed kg against the fixed-efficiency prediction.
    pub fixed: Vec<(f64, f64)>,
}

/// The back-test's rows made into the screen as they come: each section's
/// summary accumulated, each crop's points kept.
#[derive(Debug, Default)]
struct Rows {
    sections: BTreeMap<(Name, Name), SummaryAcc>,
    learnt: Vec<(f64, f64)>,
    fixed: Vec<(f64, f64)>,
}

impl Rows {
    fn section(&mut self, circuit: &Name, section: &Name) -> &mut SummaryAcc {
        self.sections.entry((circuit.clone(), section.clone())).or_default()
    }
}

impl BacktestSink for Rows {
    fn crop(&mut self, r: CropRow) -> ControlFlow<()> {
        self.section(&r.circuit, &r.section).crop(&r);
        self.learnt.push((r.weighed_kg, r.predicted_kg));
        self.fixed.push((r.weighed_kg, r.fixed_kg));
        ControlFlow::Continue(())
    }

    fn scrap(&mut self, r: ScrapRow) -> ControlFlow<()> {
        self.section(&r.circuit, &r.section).scrap(&r);
        ControlFlow::Continue(())
    }
}

impl AccuracyScreen {
    /// The plant's back-test up to `at`, as the screen shows it (the rows are not kept).
    pub fn load(plant: &Plant, at: Time) -> Result<AccuracyScreen, PlantError> {
        let (from, to) = plant.backtest_period(None, at, None)?;
        let mut rows = Rows::default();
        let summary = plant.backtest_each(from, to, None, &mut rows)?;
        let sections =
            rows.sections.into_iter().map(|((circuit, section), s)| (circuit.to_string(), section.to_string(), s.summary())).collect();
        let view = AccuracyView { summary, learnt: rows.learnt, fixed: rows.fixed };
        Ok(AccuracyScreen { backtest: Some(view), sections })
    }

    pub fn loaded(&mut self, loaded: AccuracyScreen) {
        *self = loaded;
    }
}

fn pct(v: Option<f64>) -> String {
    v.map_or("-".into(), |v| format!("{v:.2} %"))
}

fn num(v: Option<f64>, w: usize) -> String {
    v.map_or(format!("{:>w$}", "-"), |v| format!("{v:>w$.2}"))
}

/// The learnt rule against the fixed one, then the error by section.
fn figures(app: &App, s: &Summary, sections: &[(String, String, Summary)], wide: bool) -> Vec<Line<'static>> {
    let mut l = vec![Line::styled("Learnt rule against the fixed one", bold())];
    l.push(Line::raw(format!("crops weighed    {}", s.crops)));
    l.push(Line::raw(format!("mass error       {} learnt", pct(s.mass_mape_pct))));
    l.push(Line::styled(format!("                 {} fixed η", pct(s.fixed_mass_mape_pct)), fg(app, Color::DarkGray)));
    l.push(Line::raw(format!("bias             {} (+: heavy)", s.mass_bias_pct.map_or("-".into(), |v| format!("{v:+.2} %")))));
    l.push(Line::raw(format!("harvest time     {} h off", s.harvest_time_mae_h.map_or("-".into(), |h| format!("{h:.1}")))));
    l.push(Line::raw(format!("scrap weighed    {}", s.scrap)));
    l.push(Line::raw(format!("scrap error      {} points learnt", num(s.scrap_mae_pp, 4))));
    l.push(Line::styled(format!("                 {} points fixed", num(s.fixed_scrap_mae_pp, 4)), fg(app, Color::DarkGray)));
    l.push(Line::styled("Error by section", bold()));
    l.push(Line::styled(
        if wide {
            "circuit section crops   learnt    fixed     bias    scrap    fixed".to_string()
        } else {
            "sect crops learnt  fixed   bias scrap".to_string()
        },
        bold(),
    ));
    for (circuit, section, x) in sections {
        l.push(Line::raw(if wide {
            format!(
                "{circuit:<7} {section:<7} {:>5} {} {} {} {} {}",
                x.crops,
                num(x.mass_mape_pct, 8),
                num(x.fixed_mass_mape_pct, 8),
                num(x.mass_bias_pct, 8),
                num(x.scrap_mae_pp, 8),
                num(x.fixed_scrap_mae_pp, 8)
            )
        } else {
            format!(
                "{section:<4} {:>5} {} {} {} {}",
                x.crops,
                num(x.mass_mape_pct, 6),
                num(x.fixed_mass_mape_pct, 6),
                num(x.mass_bias_pct, 6),
                num(x.scrap_mae_pp, 5)
            )
        }));
    }
    l.push(Line::styled(
        if wide { "mass error and bias in %, scrap error (learnt, fixed) in points" } else { "mass %, bias %, scrap points" },
        fg(app, Color::DarkGray),
    ));
    l
}

pub fn draw(f: &mut Frame, app: &App, area: Rect) {
    let Some(bt) = &app.accuracy.backtest else {
        f.render_widget(Paragraph::new("back-testing the weighings…"), area);
        return;
    };
    let wide = area.width >= 120;
    let [about, rest] = Layout::vertical([Constraint::Length(2), Constraint::Min(6)]).areas(area);
    f.render_widget(
        Paragraph::new(
            "Each dot: a crop's weighed kg (→) against the kg predicted before it began (↑); on the diagonal = exact. \
             Errors: mean |predicted − weighed|, lower is better.",
        )
        .wrap(Wrap { trim: true }),
        about,
    );
    let [chart, text] = Layout::horizontal([Constraint::Min(30), Constraint::Length(if wide { 72 } else { 38 })]).areas(rest);
    f.render_widget(Paragraph::new(figures(app, &bt.summary, &app.accuracy.sections, wide)), text);
    if bt.learnt.is_empty() {
        f.render_widget(Paragraph::new("no weighed crop to chart yet").block(Block::default().borders(Borders::ALL)), chart);
        return;
    }
    let (learnt, fixed) = (&bt.learnt, &bt.fixed);
    let all = learnt.iter().chain(fixed).flat_map(|p| [p.0, p.1]);
    let (lo, hi) = all.fold((f64::MAX, f64::MIN), |(a, b), v| (a.min(v), b.max(v)));
    let pad = ((hi - lo) * 0.03).max(1.0);
    let (lo, hi) = ((lo - pad).floor(), (hi + pad).ceil());
    let diagonal = vec![(lo, lo), (hi, hi)];
    let ds = vec![
        Dataset::default()
            .name("exact")
            .marker(Marker::Braille)
            .graph_type(GraphType::Line)
            .style(fg(app, Color::DarkGray))
            .data(&diagonal),
        Dataset::default().name("fixed η").marker(Marker::Braille).graph_type(GraphType::Scatter).style(fg(app, Color::Gray)).data(fixed),
        Dataset::default().name("learnt").marker(Marker::Dot).graph_type(GraphType::Scatter).style(fg(app, Color::Green)).data(learnt),
    ];
    let axis = |title: &str| {
        Axis::default().title(title.to_string()).bounds([lo, hi]).labels(vec![Line::raw(format!("{lo:.0}")), Line::raw(format!("{hi:.0}"))])
    };
    f.render_widget(
        Chart::new(ds)
            .legend_position(None)
            .block(Block::default().borders(Borders::ALL).title(if wide {
                format!(" predicted against weighed, kg per cell · {} crops · • learnt  ⠂ fixed η ", bt.learnt.len())
            } else {
                " kg per cell · • learnt  ⠂ fixed η ".to_string()
            }))
            .x_axis(axis("weighed"))
            .y_axis(axis("predicted")),
        chart,
    );
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::demo::{DemoSpec, build};
    use crate::domain::backtest::summarise;

    /// The screen from the rows as they come equals the one made from the
    /// whole back-test: each section's summary of its own rows, each crop's points.
    #[test]
    fn the_screen_made_as_the_rows_come_is_the_one_made_from_them_all() {
        let dir = tempfile::tempdir().unwrap();
        let mut plant = Plant::open(&dir.path().join("demo.db")).unwrap();
        let now = chrono::DateTime::parse_from_rfc3339("2026-11-20T05:30:00Z").unwrap().to_utc();
        build(&mut plant, &DemoSpec { cells: 102, days: 45, seed: 5, reading_minutes: 30 }, now).unwrap();
        let b = plant.backtest(None, now, None).unwrap();
        let mut keys: Vec<(String, String)> = b
            .crops
            .iter()
            .map(|r| (r.circuit.to_string(), r.section.to_string()))
            .chain(b.scrap.iter().map(|r| (r.circuit.to_string(), r.section.to_string())))
            .collect();
        keys.sort();
        keys.dedup();
        let sections: Vec<(String, String, Summary)> = keys
            .into_iter()
            .map(|(circuit, section)| {
                let crops: Vec<_> =
                    b.crops.iter().filter(|r| r.circuit == circuit.as_str() && r.section == section.as_str()).cloned().collect();
                let scrap: Vec<_> =
                    b.scrap.iter().filter(|r| r.circuit == circuit.as_str() && r.section == section.as_str()).cloned().collect();
                let s = summarise(&crops, &scrap);
                (circuit, section, s)
            })
            .collect();
        let screen = AccuracyScreen::load(&plant, now).unwrap();
        assert!(sections.len() >= 4, "{sections:?}");
        assert_eq!(screen.sections, sections);
        let v = screen.backtest.unwrap();
        assert_eq!(v.summary, b.summary);
        assert_eq!(v.learnt, b.crops.iter().map(|r| (r.weighed_kg, r.predicted_kg)).collect::<Vec<_>>());
        assert_eq!(v.fixed, b.crops.iter().map(|r| (r.weighed_kg, r.fixed_kg)).collect::<Vec<_>>());
    }
}
