//! The HTML report in a real browser: headless Chromium (Debian's `chromium`, installed by
//! .ci/run) renders the demo bundle's report.html offline to a PNG; the test fails on console
//! errors, a missing chart or a blank page. Where no Chromium is installed the test is
//! skipped with a message, except under CI (`CI` set), where that is a failure.

use std::path::PathBuf;
use std::process::Command;

use crate::util::Workdir;

fn chromium() -> Option<PathBuf> {
    if let Some(p) = std::env::var_os("PANELREADY_CHROMIUM") {
        return Some(PathBuf::from(p));
    }
    ["/usr/bin/chromium", "/usr/bin/chromium-browser"]
        .iter()
        .map(PathBuf::from)
        .find(|p| p.exists())
}

fn headless(bin: &PathBuf, profile: &std::path::Path) -> Command {
    let mut c = Command::new(bin);
    c.args([
        "--headless",
        "--no-sandbox",
        "--disable-gpu",
        "--disable-quic",
        "--no-first-run",
        "--disable-background-networking",
        "--disable-component-update",
        "--disable-sync",
        "--enable-logging=stderr",
        "--v=0",
    ])
    .arg(format!("--user-data-dir={}", profile.display()));
    c
}

#[test]
fn demo_report_html_renders_offline_in_chromium() {
    let w = Workdir::new();
    w.ok(&["demo", "--out", "d"]);
    let page = w.path("d/bundle/report.html");
    let html = std::fs::read_to_string(&page).unwrap();
    // Self-contained: no scripts, stylesheets, images or fonts fetched from anywhere.
    for banned in ["<script", "<link", "url(", "<img", "@import"] {
        assert!(!html.contains(banned), "report.html contains {banned}");
    }
    let charts = [
        "chart-coverage",
        "chart-entry-exit",
        "chart-survival",
        "chart-within",
        "chart-missing",
        "chart-treated-roa",
    ];
    for id in charts {
        assert!(
            html.contains(&format!("id=\"{id}\"")),
            "{id} missing from report.html"
        );
    }
    let Some(bin) = chromium() else {
        assert!(
            std::env::var_os("CI").is_none(),
            "CI must install Debian's chromium (see .ci/run)"
        );
        eprintln!("no chromium installed: browser check skipped (CI runs it)");
        return;
    };
    let url = format!("file://{}", page.display());
    let out_dir = PathBuf::from(env!("CARGO_TARGET_TMPDIR"));
    // A wide and a narrow window; both screenshots are kept as CI artefacts.
    for (width, name) in [
        (1280, "report-demo-wide.png"),
        (700, "report-demo-narrow.png"),
    ] {
        let png = out_dir.join(name);
        let _ = std::fs::remove_file(&png);
        let shot = headless(&bin, &w.path(&format!("profile-{width}")))
            .arg(format!("--window-size={width},2400"))
            .arg(format!("--screenshot={}", png.display()))
            .arg(&url)
            .output()
            .expect("run chromium");
        let log = String::from_utf8_lossy(&shot.stderr);
        assert!(shot.status.success(), "chromium failed:\n{log}");
        let console: Vec<&str> = log.lines().filter(|l| l.contains("CONSOLE")).collect();
        assert!(
            console.is_empty(),
            "console messages:\n{}",
            console.join("\n")
        );
        let bytes = std::fs::metadata(&png).map(|m| m.len()).unwrap_or(0);
        assert!(
            bytes > 50_000,
            "screenshot of {bytes} bytes at {width} px: the page looks blank"
        );
        println!("report screenshot: {}", png.display());
    }
    // The rendered DOM holds every chart with its drawing.
    let dom = headless(&bin, &w.path("profile2"))
        .arg("--dump-dom")
        .arg(&url)
        .output()
        .expect("run chromium");
    let dom = String::from_utf8_lossy(&dom.stdout);
    for id in charts {
        let at = dom
            .find(&format!("id=\"{id}\""))
            .unwrap_or_else(|| panic!("{id} not in the rendered page"));
        let figure = &dom[at..dom[at..].find("</figure>").map_or(dom.len(), |e| at + e)];
        assert!(figure.contains("<svg"), "{id} has no drawing");
        assert_eq!(
            figure.matches("<figcaption").count(),
            1,
            "{id}: one caption per chart"
        );
    }
    // Charts read without their captions: legends and axis titles are in the drawings.
    let chart = |id: &str| {
        let at = dom.find(&format!("id=\"{id}\"")).unwrap();
        dom[at..at + dom[at..].find("</figure>").unwrap()].to_string()
    };
    for (id, words) in [
        ("chart-entry-exit", &["entrants", "leavers", "entities"][..]),
        (
            "chart-survival",
            &["periods after entry", "share observed"][..],
        ),
        ("chart-coverage", &["observed", "missing inside"][..]),
        ("chart-treated-roa", &["cutoffs", "rows"][..]),
    ] {
        let svg = chart(id);
        for word in words {
            assert!(svg.contains(word), "{id} lacks the label {word}");
        }
    }
    // The verdict opens the page, each finding linked to its section.
    let banner = dom.find("id=\"verdict-first\"").expect("verdict banner");
    assert!(banner < dom.find("chart-coverage").unwrap());
    assert!(dom.contains("href=\"#outliers-and-unit-slips\""));
    assert!(dom.contains("id=\"outliers-and-unit-slips\""));
}
