//! `tankbook report`: one self-contained HTML file (inline CSS, inline SVG
//! charts, nothing fetched from outside) in which no name from the database can
//! become live HTML.
#![allow(clippy::unwrap_used, clippy::expect_used, clippy::panic)] // tests stop loudly (DEVELOPERS.md)

use crate::common;

use common::Tk;

/// The demo plant at a fixed clock: 2026-03-10 15:30 in Madrid (UTC+1) is in the
/// first of two shifts (06:00–18:00) of production day 2026-03-10.
fn demo() -> Tk {
    let tk = Tk::new("2026-03-10T14:30:00Z");
    tk.ok(&["demo", "--no-tui", "--cells", "40", "--days", "30"]);
    tk
}

/// The demo at its default size (102 cells), at the same clock.
fn full_demo() -> Tk {
    let tk = Tk::new("2026-03-10T14:30:00Z");
    tk.ok(&["demo", "--no-tui"]);
    tk
}

fn report(tk: &Tk, args: &[&str]) -> String {
    let out = tk.dir.path().join("report.html");
    let out = out.to_str().expect("utf-8 path");
    let said = tk.ok(&[&["report", "--out", out], args].concat());
    assert!(said.contains(out), "{said}");
    std::fs::read_to_string(out).expect("report written")
}

#[test]
fn the_page_is_self_contained_with_its_charts_and_print_styles() {
    let tk = full_demo();
    let html = report(&tk, &[]);
    let lower = html.to_lowercase();
    for outside in ["http://", "https://", "src=", "<link", "@import", "url(", "<script", "<iframe", "<object", "<embed"] {
        assert!(!lower.contains(outside), "the page must fetch nothing and run nothing: found {outside}");
    }
    assert!(lower.starts_with("<!doctype html>"));
    assert!(html.contains("<style>") && html.contains("@page") && html.contains("@media print") && html.contains("break-before: page"));
    // the charts: each circuit's current, crop efficiency, the crew plan (and harvests
    // per section and scrap at pull when the period has them)
    let charts = html.matches("<svg ").count();
    assert!(charts >= 4, "{charts} charts");
    for caption in ["R1: current, kA", "R2: current, kA", "Last crop current efficiency", "Crew plan"] {
        assert!(html.contains(caption), "missing chart {caption}");
    }
    assert!(html.contains("Cathodes harvested per section") || html.contains("No cathodes harvested in the period."));
    assert!(html.contains("<polyline") || html.contains("<path"), "the current charts draw a line");
    // header: plant, period, as of, the caution
    assert!(html.contains("Vega Refinery (demo)"));
    assert!(html.contains("Shift in progress: shift 1 of 2, production day 2026-03-10"));
    assert!(html.contains("2026-03-10 06:00 to 2026-03-10 15:30"));
    assert!(html.contains("2026-03-10T14:30:00Z"));
    assert!(html.contains("Due by the end of the next shift (shift 2 of 2, 2026-03-10)"));
    assert!(html.contains("Due later in production day 2026-03-11"));
    for caution in ["advisory", "lock-out", "crane lifts", "acid handling", "local codes", "qualified engineers"] {
        assert!(lower.contains(caution), "the header carries the caution: {caution}");
    }
    // what is due agrees with the forecast: every harvest due by the end of the next shift
    // (2026-03-11 06:00 Madrid = 05:00 UTC) is listed at its due time on the plant's clock (UTC+1)
    let f = tk.json(&["forecast", "--json"]);
    let end = chrono::DateTime::parse_from_rfc3339("2026-03-11T05:00:00Z").expect("time");
    let mut listed = 0;
    for c in f["cells"].as_array().expect("cells") {
        let Some(due) = c["cathode"]["harvest_due"].as_str() else { continue };
        let due = chrono::DateTime::parse_from_rfc3339(due).expect("due");
        if c["in_circuit"] == true && due <= end {
            let local = (due + chrono::Duration::hours(1)).format("%m-%d %H:%M");
            let line = format!("{} · {local}", c["cell"].as_str().expect("id"));
            assert!(html.contains(&line), "{line} missing from the due list");
            listed += 1;
        }
    }
    assert!(listed > 0, "the demo has harvests due");
    for part in ["What the shift logged", "Harvests", "Anode changes", "Coming due", "Copper balance of the period", "Data warnings"] {
        assert!(html.contains(part), "missing {part}");
    }
}

#[test]
fn the_page_shows_what_the_shift_logged_and_agrees_with_the_balance() {
    let tk = demo();
    // a harvest and a short logged in the shift, by initials of our own
    let f = tk.json(&["forecast", "--json"]);
    let cell = f["cells"]
        .as_array()
        .and_then(|c| c.iter().find(|c| c["anode_kind"] == "soluble" && c["in_circuit"] == true && !c["cathode"].is_null()))
        .expect("a refining cell with a crop");
    let id = cell["cell"].as_str().expect("id");
    // about what its 49 or 51 cathodes hold (forced, in case the program questions it)
    let kg = (cell["cathode"]["mass_kg"].as_f64().expect("mass") * 49.0).round();
    tk.ok(&["log", "harvest", "--cell", id, "--at", "2026-03-10 15:00", "--total-kg", &kg.to_string(), "--by", "QX", "--force"]);
    tk.ok(&["log", "shorts", "--cell", id, "--at", "2026-03-10 15:05", "--count", "3", "--by", "QX"]);
    let html = report(&tk, &[]);
    assert!(html.contains("QX"), "the foreman's initials");
    assert!(html.contains(&format!("<td>{id}</td>")), "the harvest's cell");
    assert!(html.contains(&format!("{kg:.0}")), "the weighed kg");
    assert!(html.contains("3 shorts found and cleared"));
    // the balance table shows the same residual as `tankbook balance` for the period
    let b = tk.json(&["balance", "--from", "2026-03-10 06:00", "--to", "2026-03-10 15:30", "--json"]);
    let residual = format!("{:.2}", b["plant"]["residual_t"].as_f64().expect("residual"));
    assert!(html.contains(&format!("<strong>{residual}</strong>")), "residual {residual}");
}

#[test]
fn the_last_shift_and_a_period_of_ones_own() {
    let tk = demo();
    let html = report(&tk, &["--shift", "last"]);
    // the night shift of 2026-03-09: 18:00 to 06:00 Madrid time
    assert!(html.contains("Last shift: shift 2 of 2, production day 2026-03-09"), "title");
    assert!(html.contains("2026-03-09 18:00 to 2026-03-10 06:00"));
    // what is due next is counted from the shift that follows it: the day shift of the 10th
    assert!(html.contains("Due by the end of the next shift (shift 1 of 2, 2026-03-10)"), "next shift");
    let html = report(&tk, &["--from", "2026-03-08 06:00", "--to", "2026-03-10 06:00"]);
    assert!(html.contains("2026-03-08 06:00 to 2026-03-10 06:00"));
    // usage errors are exit 2; a bad period or a file that cannot be written exit 1 and change nothing
    tk.fails(2, &["report"]);
    tk.fails(2, &["report", "--shift", "last", "--from", "2026-03-08 06:00", "--to", "2026-03-09 06:00", "--out", "x.html"]);
    tk.fails(2, &["report", "--from", "2026-03-08 06:00", "--out", "x.html"]);
    let before = tk.dump();
    let e = tk.fails(1, &["report", "--from", "2026-03-09 06:00", "--to", "2026-03-08 06:00", "--out", "x.html"]);
    assert!(e.contains("--from"), "{e}");
    let missing = tk.dir.path().join("no/such/folder/r.html");
    let e = tk.fails(1, &["report", "--out", missing.to_str().expect("path")]);
    assert!(e.contains("r.html"), "{e}");
    assert_eq!(tk.dump(), before);
}

/// A plant, circuit, cell and foreman named to break out of the page.
const HOSTILE: &str = r#"
[plant]
name = "<script>alert('plant')</script> & Sons"
time_zone = "UTC"
day_starts_at = "06:00"

[[circuit]]
name = "<svg onload=alert(1)>"
max_amps = 45000

[[circuit.section]]
name = "<b>A</b>"
cells = ["<img/src=x/onerror=alert(2)>", "A2"]
"#;

#[test]
fn hostile_names_are_escaped_everywhere_charts_included() {
    let tk = Tk::new("2026-03-02T00:00:00Z");
    let layout = tk.file("hostile.toml", HOSTILE);
    tk.ok(&["layout", "load", &layout]);
    let csv =
        common::current_csv(&(0..=24).map(|h| (h as f64, 30_000.0)).collect::<Vec<_>>()).replace(",C1,", ",\"<svg onload=alert(1)>\",");
    let csv = tk.file("c.csv", &csv);
    tk.ok(&["import", "current", &csv]);
    let cell = "<img/src=x/onerror=alert(2)>";
    for c in [cell, "A2"] {
        tk.ok(&["log", "anodes", "--cell", c, "--at", "2026-03-01T00:00:00Z", "--count", "50", "--mean-kg", "380", "--by", "<i>"]);
    }
    tk.ok(&["log", "harvest", "--cell", cell, "--at", "2026-03-01T20:00:00Z", "--total-kg", "680", "--by", "<i>"]);
    let circuit = "<svg onload=alert(1)>";
    tk.ok(&["log", "outage", "--circuit", circuit, "--from", "2026-03-01T10:00:00Z", "--to", "2026-03-01T11:00:00Z", "--by", "<i>"]);
    let html = report(&tk, &["--from", "2026-03-01T00:00:00Z", "--to", "2026-03-02T00:00:00Z"]);
    let lower = html.to_lowercase();
    for live in ["<script", "<img", "<svg onload", "<b>", "<i>"] {
        let at = lower.find(live);
        assert!(at.is_none(), "{live} reached the page as HTML: …{}…", at.map_or("", |i| &html[i.saturating_sub(80)..i + 40]));
    }
    assert!(
        html.contains("&lt;script&gt;alert('plant')&lt;/script&gt; &amp; Sons") || html.contains("&lt;script&gt;alert(&#39;plant&#39;)")
    );
    assert!(html.contains("&lt;img/src=x/onerror=alert(2)&gt;"), "the cell's name, escaped, in the tables");
    assert!(html.contains("&lt;svg onload=alert(1)&gt;: current, kA"), "the circuit's name, escaped, in the chart");
    assert!(html.contains("&lt;I&gt;"), "the initials, escaped");
    // the outage is listed and shaded on the circuit's chart
    assert!(html.contains("circuit down until 2026-03-01 11:00"));
    assert!(html.contains("outages shaded red"));
    assert_eq!(html.matches("opacity=\"0.25\" fill=\"#C8281E\"").count(), 1, "one outage shaded in red on the current chart");
}

#[test]
fn a_report_at_the_first_instant_of_a_shift_is_an_empty_period() {
    let tk = demo();
    let out = tk.dir.path().join("start.html");
    // 06:00 in Madrid (UTC+1): the day shift begins this instant
    let run = tk.cmd().env("TANKBOOK_NOW", "2026-03-10T05:00:00Z").args(["report", "--out", out.to_str().expect("path")]).output();
    let run = run.expect("run");
    assert!(run.status.success(), "{}", String::from_utf8_lossy(&run.stderr));
    let html = std::fs::read_to_string(&out).expect("written");
    assert!(html.contains("Shift in progress: shift 1 of 2, production day 2026-03-10"));
    assert!(html.contains("No harvests.") && html.contains("No anodes pulled."));
}

#[test]
fn the_screens_save_the_shift_report_beside_the_database() {
    let tk = demo();
    let plant = tankbook::plant::Plant::open(&tk.db).expect("open");
    let now = chrono::DateTime::parse_from_rfc3339("2026-03-10T14:30:00Z").expect("time").to_utc();
    let w = plant.save_shift_report(now).expect("saved");
    assert_eq!(w.path, tk.dir.path().join("reports").join("shift-2026-03-10-1.html"));
    let html = std::fs::read_to_string(&w.path).expect("written");
    assert_eq!(html.len(), w.bytes);
    assert!(html.contains("Shift in progress: shift 1 of 2, production day 2026-03-10"));
    // the same as the command writes for the same shift and clock
    assert_eq!(html, report(&tk, &[]));
}

#[test]
fn the_patrol_list_is_on_the_page_as_tankbook_patrol_ranks_it() {
    let tk = full_demo();
    let html = report(&tk, &[]);
    let patrol = tk.json(&["patrol", "--json"]);
    // the cells the patrol suspects (score 6 or more, its tile threshold), in its order
    let suspects: Vec<&str> = patrol["cells"]
        .as_array()
        .expect("cells")
        .iter()
        .filter(|c| c["score"].as_f64().expect("score") >= 6.0)
        .map(|c| c["cell"].as_str().expect("id"))
        .collect();
    assert!(!suspects.is_empty(), "the demo has shorted cells");
    let at = html.find("Patrol for shorts").expect("a patrol section");
    let rows = &html[at..];
    let mut last = 0;
    for cell in suspects.iter().take(12) {
        let here = rows.find(&format!("<td>{cell}</td>")).unwrap_or_else(|| panic!("{cell} listed for the patrol"));
        assert!(here >= last, "{cell} out of the patrol's order");
        last = here;
    }
}
