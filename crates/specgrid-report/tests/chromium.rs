//! Opens the HTML report in headless Chromium (Debian's `chromium` package): the page must
//! load with no console errors and give a non-empty screenshot. Opt-in, because it needs the
//! browser: SPECGRID_CHROMIUM=1 cargo test -p specgrid-report --release --test chromium.
//! Set SPECGRID_SCREENSHOT_DIR to keep the screenshots.

mod common;

use std::path::Path;
use std::process::Command;

use specgrid_report::Report;

fn enabled() -> bool {
    std::env::var("SPECGRID_CHROMIUM").is_ok_and(|v| v == "1")
}

/// Loads `html` in headless Chromium, returns (screenshot bytes, console lines).
fn open_in_chromium(html: &Path, png: &Path, height: u32) -> (Vec<u8>, Vec<String>) {
    let output = Command::new("chromium")
        .args([
            "--headless",
            "--no-sandbox",
            "--disable-gpu",
            "--hide-scrollbars",
            "--enable-logging=stderr",
            "--v=0",
            &format!("--window-size=1040,{height}"),
            &format!("--screenshot={}", png.display()),
        ])
        .arg(format!("file://{}", html.display()))
        .output()
        .expect(
            "chromium must be installed (apt-get install -y chromium) when SPECGRID_CHROMIUM=1",
        );
    let stderr = String::from_utf8_lossy(&output.stderr);
    let console: Vec<String> = stderr
        .lines()
        .filter(|l| l.contains("CONSOLE"))
        .map(str::to_string)
        .collect();
    assert!(output.status.success(), "chromium failed: {stderr}");
    (std::fs::read(png).expect("no screenshot written"), console)
}

#[test]
fn report_opens_in_headless_chromium_without_console_errors() {
    if !enabled() {
        eprintln!("skipped: set SPECGRID_CHROMIUM=1 to run the browser check");
        return;
    }
    let dir = tempfile::tempdir().unwrap();
    let keep = std::env::var_os("SPECGRID_SCREENSHOT_DIR");
    for (name, input) in [
        ("small", common::small_grid()),
        ("grouped", common::big_grid(4)),
        ("huge", common::big_grid(10)),
    ] {
        let html = dir.path().join(format!("{name}.html"));
        std::fs::write(&html, Report::build(input).unwrap().html()).unwrap();
        let png = dir.path().join(format!("{name}.png"));
        let (bytes, console) = open_in_chromium(&html, &png, 2400);
        // PNG signature (ISO/IEC 15948) and a picture bigger than a blank page's.
        assert_eq!(&bytes[..8], b"\x89PNG\r\n\x1a\n");
        assert!(
            bytes.len() > 20_000,
            "{name}: suspiciously small screenshot"
        );
        assert!(console.is_empty(), "{name}: console messages: {console:#?}");
        if let Some(keep) = &keep {
            std::fs::copy(&png, Path::new(keep).join(format!("{name}.png"))).unwrap();
        }
    }
}
