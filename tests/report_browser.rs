//! The report in a real browser: headless Chromium (Debian's `chromium`, installed by
//! tools/install-browser.sh) loads report.html from disk, with networking features off, and
//! must show the summary table without a single console message.
//!
//! How console errors are caught: Chromium started with `--enable-logging=stderr --v=0` writes
//! every page console message, including uncaught exceptions, to stderr as
//! `...:CONSOLE:<line>] "<message>", source: <url> (<line>)`. The report has no script, so any
//! such line is a failure. So that a silent browser cannot pass by accident, the same command
//! first runs on a canary page that logs an error and throws; both must be seen, else the test
//! fails saying the detection does not work with this Chromium.
//!
//! Without a browser (no /usr/bin/chromium and no CHROMIUM variable) the test prints why and
//! returns.

mod common;

use std::path::{Path, PathBuf};
use std::process::{Command, Stdio};
use std::time::{Duration, Instant};

use common::{hostile_run_with_report, HOSTILE_LABEL};

/// The browser to use, or the path that was looked for.
fn browser() -> Result<PathBuf, PathBuf> {
    let path = std::env::var_os("CHROMIUM")
        .map(PathBuf::from)
        .unwrap_or_else(|| PathBuf::from("/usr/bin/chromium"));
    if path.is_file() {
        Ok(path)
    } else {
        Err(path)
    }
}

struct Page {
    dom: String,
    console: Vec<String>,
}

/// Loads `page` in headless Chromium with a fresh profile; returns the DOM after load and the
/// console lines from stderr.
fn load(browser: &Path, page: &Path, scratch: &Path) -> Page {
    let profile = tempfile::tempdir_in(scratch).unwrap();
    let stdout_path = scratch.join("dom.html");
    let stderr_path = scratch.join("stderr.txt");
    let mut child = Command::new(browser)
        .args([
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
            "--dump-dom",
        ])
        .arg(format!("--user-data-dir={}", profile.path().display()))
        .arg(format!("file://{}", page.display()))
        .stdin(Stdio::null())
        .stdout(std::fs::File::create(&stdout_path).unwrap())
        .stderr(std::fs::File::create(&stderr_path).unwrap())
        .spawn()
        .unwrap_or_else(|e| panic!("cannot start {}: {e}", browser.display()));
    let deadline = Instant::now() + Duration::from_secs(120);
    loop {
        if let Some(status) = child.try_wait().unwrap() {
            assert!(
                status.success(),
                "{} exited with {status}; stderr:\n{}",
                browser.display(),
                std::fs::read_to_string(&stderr_path).unwrap_or_default()
            );
            break;
        }
        if Instant::now() > deadline {
            child.kill().unwrap();
            child.wait().unwrap();
            panic!(
                "{} did not finish loading {} within 120 s",
                browser.display(),
                page.display()
            );
        }
        std::thread::sleep(Duration::from_millis(50));
    }
    let stderr = std::fs::read_to_string(&stderr_path).unwrap();
    Page {
        dom: std::fs::read_to_string(&stdout_path).unwrap(),
        console: stderr
            .lines()
            .filter(|l| l.contains(":CONSOLE") || l.contains("Uncaught"))
            .map(str::to_string)
            .collect(),
    }
}

#[test]
fn report_loads_in_headless_chromium_without_console_errors() {
    let browser = match browser() {
        Ok(path) => path,
        Err(missing) => {
            println!(
                "SKIPPED report_loads_in_headless_chromium_without_console_errors: no browser at {} (set CHROMIUM to another path, or run tools/install-browser.sh as root to install Debian's chromium)",
                missing.display()
            );
            return;
        }
    };
    let dir = tempfile::tempdir().unwrap();

    let canary = dir.path().join("canary.html");
    std::fs::write(
        &canary,
        "<!DOCTYPE html><html><body><p>canary</p><script>console.error('canary-console-error'); throw new Error('canary-uncaught');</script></body></html>",
    )
    .unwrap();
    let seen = load(&browser, &canary, dir.path());
    assert!(
        seen.console
            .iter()
            .any(|l| l.contains("canary-console-error"))
            && seen.console.iter().any(|l| l.contains("canary-uncaught")),
        "console detection does not work with {}: canary lines not found in {:?}",
        browser.display(),
        seen.console
    );

    let run = hostile_run_with_report(dir.path());
    let page = load(&browser, &run.join("report.html"), dir.path());
    assert!(
        page.console.is_empty(),
        "console messages while loading the report: {:#?}",
        page.console
    );
    let dom = &page.dom;
    let table = dom
        .find("id=\"summary-table\"")
        .map(|i| &dom[i..])
        .expect("summary table in the loaded DOM");
    let table = &table[..table.find("</table>").expect("summary table is closed")];
    assert!(
        table.matches("<tr>").count() >= 2,
        "summary table has a header and rows"
    );
    assert!(dom.contains("Confounder ranking"));
    // The hostile label stayed text: no script element exists in the parsed document, and the
    // label serialises back as a text node (HTML serialisation escapes &, < and > in text).
    assert!(!dom.contains("<script"), "a script element was created");
    let as_text = HOSTILE_LABEL
        .replace('&', "&amp;")
        .replace('<', "&lt;")
        .replace('>', "&gt;");
    assert!(dom.contains(&as_text), "label shown as text");
    println!(
        "{} loaded {} ({} bytes of DOM) with no console messages",
        browser.display(),
        run.join("report.html").display(),
        dom.len()
    );
}
