//! The HTML report in a real browser: Chromium, headless (Debian's
//! `chromium`, installed by `.ci/run`), renders the page to its DOM and to a
//! screenshot; every section and plot must be there and the console quiet.

use std::path::Path;
use std::process::Command;

use gleaner::analysis::html::PLOT_TITLES;
use gleaner::analysis::text::Section;
use gleaner::analysis::{analyze_file, html};
use gleaner::sim::run::engine::simulate_to_log;
use gleaner_tests::{browser, scenario};

/// Runs the headless browser on `page` with `args`; returns stdout and the
/// console messages it logged.
fn headless(page: &Path, args: &[&str]) -> (String, Vec<String>) {
    let out = Command::new(browser().expect("the test checked for the browser"))
        .args([
            "--headless",
            "--no-sandbox",
            "--disable-gpu",
            "--hide-scrollbars",
        ])
        .args(["--enable-logging=stderr", "--v=0"])
        .args(args)
        .arg(page)
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let console = String::from_utf8_lossy(&out.stderr)
        .lines()
        .filter(|l| l.contains(":CONSOLE"))
        .map(str::to_owned)
        .collect();
    (String::from_utf8_lossy(&out.stdout).into_owned(), console)
}

#[test]
fn the_console_check_sees_a_page_that_logs_an_error() {
    if browser().is_none() {
        return;
    }
    // The check below would pass on any page if the browser's console were
    // not read: show that a page with an error is caught.
    let dir = tempfile::tempdir().unwrap();
    let page = dir.path().join("noisy.html");
    std::fs::write(
        &page,
        "<!DOCTYPE html><p>x</p><script>console.error('boom')</script>",
    )
    .unwrap();
    let (_, console) = headless(&page, &["--dump-dom"]);
    assert!(console.iter().any(|l| l.contains("boom")), "{console:?}");
}

#[test]
fn the_report_page_renders_every_section_and_plot_in_a_browser() {
    if browser().is_none() {
        return;
    }
    let dir = tempfile::tempdir().unwrap();
    let log = dir.path().join("run.gleanlog");
    simulate_to_log(
        scenario("greenhouse-day", Some(24.0)),
        3,
        &log,
        1_700_000_000_000_000,
        &gleaner::progress::none(),
    )
    .unwrap();
    let page = dir.path().join("run.html");
    std::fs::write(&page, html::render(&analyze_file(&log).unwrap()).unwrap()).unwrap();

    let (dom, console) = headless(&page, &["--dump-dom"]);
    assert!(console.is_empty(), "console: {console:?}");
    for section in Section::ALL {
        let opening = format!(
            "<section id=\"{}\"><h2>{}</h2>",
            section.id(),
            section.title()
        );
        assert!(dom.contains(&opening), "{} missing", section.title());
    }
    for title in PLOT_TITLES {
        assert!(
            dom.contains(&format!("<figcaption>{title}</figcaption>")),
            "{title} missing"
        );
    }
    assert_eq!(dom.matches("<svg").count(), PLOT_TITLES.len());
    // Offline: nothing to fetch, nothing to run.
    assert!(!dom.contains("<script") && !dom.contains("src=\"http"));

    let shot = dir.path().join("page.png");
    let (_, console) = headless(
        &page,
        &[
            "--window-size=1000,4000",
            &format!("--screenshot={}", shot.display()),
        ],
    );
    assert!(console.is_empty(), "console: {console:?}");
    let png = std::fs::read(&shot).unwrap();
    assert!(png.starts_with(b"\x89PNG\r\n\x1a\n"), "a PNG");
    // A blank 1000 x 4000 page compresses to about 20 kB (measured); plots
    // and tables do not.
    assert!(png.len() > 100_000, "{} bytes", png.len());
}
