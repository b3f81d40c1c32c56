//! The shift report in a real browser: headless Chromium prints the demo's
//! report to PDF (1 to 4 A4 pages) and takes a screenshot that is not blank.
//!
//! Ignored by default (it needs Debian's `chromium`); `.ci/run` installs it and
//! runs `cargo test -- --ignored`. Without chromium the test fails and says so:
//! it never passes without having looked.
#![allow(clippy::unwrap_used, clippy::expect_used, clippy::panic)] // tests stop loudly (DEVELOPERS.md)

use crate::common;

use std::path::{Path, PathBuf};
use std::process::{Command, Stdio};
use std::time::{Duration, Instant};

use common::Tk;

/// The browser: `TANKBOOK_CHROMIUM` if set, else `chromium` on the PATH.
fn chromium() -> PathBuf {
    if let Some(p) = std::env::var_os("TANKBOOK_CHROMIUM") {
        return PathBuf::from(p);
    }
    let path = std::env::var_os("PATH").unwrap_or_default();
    std::env::split_paths(&path).map(|d| d.join("chromium")).find(|p| p.is_file()).unwrap_or_else(|| {
        panic!("chromium is not installed, so the report cannot be checked in a browser: run `apt-get install -y chromium` (as .ci/run does) or set TANKBOOK_CHROMIUM")
    })
}

/// Runs headless chromium on `page` with `extra` flags, in a profile of its own,
/// with everything that could reach the network switched off; at most two minutes.
fn run_chromium(page: &Path, extra: &[String]) {
    let profile = tempfile::tempdir().expect("profile dir");
    let mut cmd = Command::new(chromium());
    cmd.args([
        "--headless",
        "--no-sandbox",
        "--disable-gpu",
        "--disable-quic",
        "--no-first-run",
        "--disable-background-networking",
        "--disable-component-update",
        "--disable-sync",
        "--hide-scrollbars",
    ])
    .arg(format!("--user-data-dir={}", profile.path().display()))
    .args(extra)
    .arg(format!("file://{}", page.display()))
    .stdout(Stdio::null())
    .stderr(Stdio::piped());
    let mut child = cmd.spawn().unwrap_or_else(|e| panic!("cannot start {}: {e}", chromium().display()));
    let started = Instant::now();
    loop {
        match child.try_wait().expect("wait for chromium") {
            Some(status) => {
                let mut err = String::new();
                if let Some(mut s) = child.stderr.take() {
                    use std::io::Read;
                    let _ = s.read_to_string(&mut err);
                }
                assert!(status.success(), "chromium {extra:?} failed ({status}): {err}");
                return;
            }
            None if started.elapsed() > Duration::from_secs(120) => {
                let _ = child.kill();
                let _ = child.wait();
                panic!("chromium {extra:?} did not finish in two minutes");
            }
            None => std::thread::sleep(Duration::from_millis(100)),
        }
    }
}

/// Page objects in a PDF: `/Type /Page` dictionaries (not the `/Type /Pages` tree).
fn pdf_pages(pdf: &[u8]) -> usize {
    let needle = b"/Type /Page";
    pdf.windows(needle.len() + 1).filter(|w| &w[..needle.len()] == needle && w[needle.len()] != b's').count()
}

/// The demo's shift report (default size), written into the test's folder.
fn demo_report(tk: &Tk) -> PathBuf {
    tk.ok(&["demo", "--no-tui"]);
    let page = tk.dir.path().join("shift.html");
    tk.ok(&["report", "--out", page.to_str().expect("utf-8 path")]);
    page
}

#[test]
#[ignore = "needs chromium"]
fn chromium_prints_the_demo_shift_report_on_one_to_four_pages_and_shows_it() {
    let tk = Tk::new("2026-03-10T14:30:00Z");
    let page = demo_report(&tk);
    let html = std::fs::read_to_string(&page).expect("report");
    assert!(html.matches("<svg ").count() >= 4, "the charts are in the page");
    assert!(!html.contains("http://") && !html.contains("https://") && !html.contains("src="), "self-contained");

    let pdf = tk.dir.path().join("shift.pdf");
    run_chromium(&page, &[format!("--print-to-pdf={}", pdf.display()), "--no-pdf-header-footer".into()]);
    let bytes = std::fs::read(&pdf).expect("chromium wrote the PDF");
    assert!(bytes.starts_with(b"%PDF-"), "a PDF");
    let pages = pdf_pages(&bytes);
    assert!((1..=4).contains(&pages), "a shift's report prints on 1 to 4 pages, this one on {pages}");

    let png = tk.dir.path().join("shift.png");
    run_chromium(&page, &[format!("--screenshot={}", png.display()), "--window-size=1000,1400".into()]);
    let decoder = png::Decoder::new(std::io::BufReader::new(std::fs::File::open(&png).expect("chromium wrote the screenshot")));
    let mut reader = decoder.read_info().expect("a PNG");
    let mut buf = vec![0; reader.output_buffer_size().expect("buffer size")];
    let info = reader.next_frame(&mut buf).expect("decode the screenshot");
    assert_eq!((info.width, info.height), (1000, 1400));
    let px = info.color_type.samples();
    let pixels: Vec<&[u8]> = buf[..info.buffer_size()].chunks(px).collect();
    let inked = pixels.iter().filter(|p| p.iter().take(3).any(|&c| c < 200)).count();
    let share = inked as f64 / pixels.len() as f64;
    // text, table rules and the red caution box: a few per cent of the pixels, never none and never all
    assert!(share > 0.01 && share < 0.6, "{:.1} % of the screenshot is ink: blank or broken", share * 100.0);
    let reds = pixels.iter().filter(|p| p[0] > 150 && p[1] < 80 && p[2] < 80).count();
    assert!(reds > 50, "the advisory box and the late work are drawn in red ({reds} red pixels)");
}

#[test]
#[ignore = "needs chromium"]
fn chromium_prints_the_last_shift_and_a_week_too() {
    let tk = Tk::new("2026-03-10T14:30:00Z");
    tk.ok(&["demo", "--no-tui", "--cells", "40", "--days", "30"]);
    for (name, args, most) in
        [("last.html", vec!["--shift", "last"], 4), ("week.html", vec!["--from", "2026-03-03 06:00", "--to", "2026-03-10 06:00"], 40)]
    {
        let page = tk.dir.path().join(name);
        tk.ok(&[&["report", "--out", page.to_str().expect("path")], &args[..]].concat());
        let pdf = page.with_extension("pdf");
        run_chromium(&page, &[format!("--print-to-pdf={}", pdf.display()), "--no-pdf-header-footer".into()]);
        let pages = pdf_pages(&std::fs::read(&pdf).expect("pdf"));
        assert!((1..=most).contains(&pages), "{name}: {pages} pages");
    }
}
