//! The demo's `report.html` opened in a real browser (headless Chromium): it renders
//! something that is not blank and logs no script error. Skips when
//! `/usr/bin/chromium` is missing, unless `STEPFLUX_REQUIRE_BROWSER=1` (CI sets it),
//! in which case a missing browser fails the test.

use std::path::Path;
use std::process::{Command, Stdio};
use std::time::{Duration, Instant};

mod common;
use common::scratch;

const CHROMIUM: &str = "/usr/bin/chromium";
/// A headless screenshot of a page this size takes a few seconds; two minutes covers
/// a loaded two-core machine. Past it the browser is stopped by its id.
const BROWSER_TIMEOUT: Duration = Duration::from_secs(120);

/// Screenshot of `page` into `png`; returns the browser's log (stderr).
fn screenshot(page: &Path, png: &Path, profile: &Path) -> String {
    std::fs::create_dir_all(profile).expect("new empty profile folder");
    let log = png.with_extension("log");
    let mut child = Command::new(CHROMIUM)
        .args([
            "--headless",
            "--no-sandbox",
            "--disable-gpu",
            "--disable-quic",
            "--no-first-run",
            "--disable-background-networking",
            "--disable-component-update",
            "--disable-sync",
        ])
        .arg(format!("--user-data-dir={}", profile.display()))
        .arg(format!("--screenshot={}", png.display()))
        .arg("--window-size=1200,1600")
        .args(["--enable-logging=stderr", "--v=0"])
        .arg(format!("file://{}", page.display()))
        .stdout(Stdio::null())
        .stderr(std::fs::File::create(&log).expect("log file"))
        .spawn()
        .expect("chromium starts");
    let started = Instant::now();
    loop {
        if child.try_wait().expect("waiting for chromium").is_some() {
            break;
        }
        if started.elapsed() > BROWSER_TIMEOUT {
            // Our own child, stopped by its id.
            let _ = child.kill();
            let _ = child.wait();
            panic!(
                "chromium took longer than {BROWSER_TIMEOUT:?} on {}",
                page.display()
            );
        }
        std::thread::sleep(Duration::from_millis(100));
    }
    std::fs::read_to_string(&log).unwrap_or_default()
}

/// Lines where Chromium reports a page's script error (an uncaught exception, or a
/// console message logged at error level).
fn console_errors(log: &str) -> Vec<&str> {
    log.lines()
        .filter(|l| l.contains("Uncaught") || l.contains("ERROR:CONSOLE"))
        .collect()
}

/// Width and height from a PNG's IHDR chunk (PNG spec, ISO/IEC 15948 §11.2.2: the
/// 8-byte signature, then length, "IHDR", width, height, big-endian).
fn png_size(bytes: &[u8]) -> Option<(u32, u32)> {
    let signature = [0x89, b'P', b'N', b'G', 0x0d, 0x0a, 0x1a, 0x0a];
    if bytes.len() < 24 || bytes[..8] != signature || &bytes[12..16] != b"IHDR" {
        return None;
    }
    let be = |i: usize| u32::from_be_bytes([bytes[i], bytes[i + 1], bytes[i + 2], bytes[i + 3]]);
    Some((be(16), be(20)))
}

#[test]
fn demo_report_renders_in_a_browser_without_script_errors() {
    if !Path::new(CHROMIUM).exists() {
        if std::env::var("STEPFLUX_REQUIRE_BROWSER").as_deref() == Ok("1") {
            panic!(
                "STEPFLUX_REQUIRE_BROWSER=1 but {CHROMIUM} is missing: install Debian's \
                 `chromium` package (.ci/run does)"
            );
        }
        eprintln!("skipped: {CHROMIUM} not found (set STEPFLUX_REQUIRE_BROWSER=1 to fail instead)");
        return;
    }
    let dir = scratch("report_browser");
    let status = Command::new(env!("CARGO_BIN_EXE_stepflux"))
        .args(["demo", "--out"])
        .arg(&dir)
        .stdout(Stdio::null())
        .status()
        .expect("binary runs");
    assert_eq!(status.code(), Some(0), "the demo passes its own limits");
    let report = dir.join("demo/report.html");
    assert!(report.is_file(), "demo writes {}", report.display());

    // The control: a blank page whose script throws. Its screenshot is what "blank"
    // weighs, and its log proves the error scan finds a script error when there is
    // one, so neither check below can pass vacuously.
    let control = dir.join("control.html");
    std::fs::write(
        &control,
        "<!DOCTYPE html><html><body><script>throw new Error('control')</script></body></html>",
    )
    .expect("control page");
    let control_log = screenshot(
        &control,
        &dir.join("control.png"),
        &dir.join("profile-control"),
    );
    assert!(
        !console_errors(&control_log).is_empty(),
        "the control page's thrown error must show in the browser log; log:\n{control_log}"
    );
    let blank = std::fs::read(dir.join("control.png")).expect("control screenshot");

    let png = dir.join("report.png");
    let log = screenshot(&report, &png, &dir.join("profile-report"));
    let errors = console_errors(&log);
    assert!(
        errors.is_empty(),
        "script errors in report.html: {errors:#?}"
    );
    let shot = std::fs::read(&png).expect("report screenshot written");
    assert_eq!(png_size(&shot), Some((1200, 1600)), "a 1200×1600 PNG");
    // A single colour deflates to almost nothing (each row is one filter byte and 3600
    // equal bytes), so the blank control is under 10 kB (8.9 kB when this was written); text, tables and plots
    // make the report's screenshot ten times that and more (about 200 kB when this
    // was written). Ten times is far from both.
    assert!(
        shot.len() > 10 * blank.len(),
        "report screenshot {} bytes is not well above a blank page's {} bytes: blank or \
         single-coloured ({})",
        shot.len(),
        blank.len(),
        png.display()
    );
    eprintln!("screenshot: {}", png.display());
    let html = std::fs::read_to_string(&report).expect("report");
    assert!(
        html.contains("Tightest reset: cycle"),
        "the worst reset cycle's plot is in the report"
    );

    // The example study's report, the same checks: it renders, its sorting script runs
    // without an error, and it holds the pass rate and the limit histograms.
    let status = Command::new(env!("CARGO_BIN_EXE_stepflux"))
        .args(["batch", "--quiet", "--jobs", "2", "--out"])
        .arg(dir.join("study"))
        .arg(Path::new(env!("CARGO_MANIFEST_DIR")).join("scenarios/study_corners.json"))
        .status()
        .expect("binary runs");
    assert!(status.code().is_some_and(|c| c <= 1), "the study runs");
    let study = std::fs::read_dir(dir.join("study"))
        .expect("study folder")
        .filter_map(|e| e.ok().map(|e| e.path().join("report.html")))
        .find(|p| p.is_file())
        .expect("the study writes report.html");
    let png = dir.join("study.png");
    let log = screenshot(&study, &png, &dir.join("profile-study"));
    let errors = console_errors(&log);
    assert!(
        errors.is_empty(),
        "script errors in the study report: {errors:#?}"
    );
    let shot = std::fs::read(&png).expect("study screenshot written");
    assert!(
        shot.len() > 10 * blank.len(),
        "study screenshot {} bytes is blank-like against {} bytes",
        shot.len(),
        blank.len()
    );
    let html = std::fs::read_to_string(&study).expect("study report");
    assert!(html.contains("Wilson score interval"), "pass rate shown");
    eprintln!("screenshot: {}", png.display());
}
