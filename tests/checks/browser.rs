//! The demo's `report.html` in a real browser: headless Chromium (Debian's `chromium`).
//!
//! Gated by `QUORUM_BROWSER_TESTS=1` rather than `#[ignore]`, so that `.ci/run` (which
//! installs chromium and sets the variable) always runs it, while a developer without a
//! browser still gets a green `cargo test`. With the variable set, a missing browser is a
//! failure, not a skip. `QUORUM_CHROMIUM` names another binary (default
//! `/usr/bin/chromium`, then `chromium` on the PATH).
//!
//! How the check decides:
//! * **console errors**: Chromium runs with `--enable-logging=stderr --v=0`, which copies
//!   every message of the page's console to stderr as a line containing `:CONSOLE`. The
//!   page has no script, so any console message is a problem — in practice a
//!   Content-Security-Policy violation (the page forbids every load, so a stray external
//!   font, image or style shows up here) or a parse complaint. Any `:CONSOLE` line fails
//!   the test. A self-test first shows that a page with a blocked image does produce
//!   such a line, so this check can fail.
//! * **blank page**: the screenshot (`--screenshot`, 1280 × 2400) is decoded (png crate)
//!   and must have more than 5% non-white pixels, the report's header colour in its top
//!   rows (the inline CSS applied), and the plots' amber series colour somewhere (the
//!   inline SVG rendered).
//! * **DOM**: a second run with `--dump-dom` must show every section, one `<svg>` per
//!   plot file, and no `<script>`.
//! * **hostile labels**: a report whose factor names and level labels are markup
//!   (`<script>`, `<b>`, quotes, ampersands, `]]>`) must reach the browser's DOM as text
//!   only: no `<script>` or `<b>` element, the labels serialized escaped, no console line.
//!
//! Each run gets a fresh `--user-data-dir` and the flags that keep a headless browser
//! off the network (`--disable-background-networking`, `--disable-component-update`,
//! `--disable-sync`, `--disable-quic`, `--no-first-run`); `--no-sandbox` because CI runs
//! as root. Runs are killed after [`BROWSER_TIMEOUT`].

use quorum::config::{Config, DataSpec, Format, Job, OutputSpec, Settings, Source};
use quorum::report::{folder, html::SECTIONS, style};
use std::path::{Path, PathBuf};
use std::process::{Command, Stdio};
use std::time::{Duration, Instant};

/// Longest a browser run may take (a cold start on a loaded 2-core machine takes a few seconds).
const BROWSER_TIMEOUT: Duration = Duration::from_secs(120);
/// Smallest share of non-white pixels of a page that shows something.
const MIN_INK_SHARE: f64 = 0.05;
/// Per-channel tolerance when looking for a colour (anti-aliasing, colour management).
const COLOUR_TOLERANCE: i32 = 10;

fn enabled() -> bool {
    std::env::var("QUORUM_BROWSER_TESTS").is_ok_and(|v| v == "1")
}

fn chromium() -> PathBuf {
    if let Ok(p) = std::env::var("QUORUM_CHROMIUM") {
        return PathBuf::from(p);
    }
    let debian = PathBuf::from("/usr/bin/chromium");
    if debian.exists() {
        debian
    } else {
        PathBuf::from("chromium")
    }
}

struct Run {
    ok: bool,
    stdout: String,
    stderr: String,
}

/// Runs headless Chromium on `page` with `extra` flags and a fresh profile in `scratch`.
fn browse(page: &Path, extra: &[String], scratch: &Path) -> Run {
    let profile = tempfile::tempdir_in(scratch).unwrap();
    let out_path = scratch.join(format!("stdout-{}.txt", extra.len()));
    let err_path = scratch.join(format!("stderr-{}.txt", extra.len()));
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
        "--enable-logging=stderr",
        "--v=0",
    ])
    .arg(format!("--user-data-dir={}", profile.path().display()))
    .args(extra)
    .arg(format!("file://{}", page.canonicalize().unwrap().display()))
    .stdin(Stdio::null())
    .stdout(std::fs::File::create(&out_path).unwrap())
    .stderr(std::fs::File::create(&err_path).unwrap());
    let mut child = cmd
        .spawn()
        .unwrap_or_else(|e| panic!("cannot start {} ({e}); install Debian's chromium", chromium().display()));
    let start = Instant::now();
    let status = loop {
        if let Some(s) = child.try_wait().unwrap() {
            break Some(s);
        }
        if start.elapsed() > BROWSER_TIMEOUT {
            let _ = child.kill();
            let _ = child.wait();
            break None;
        }
        std::thread::sleep(Duration::from_millis(100));
    };
    Run {
        ok: status.is_some_and(|s| s.success()),
        stdout: std::fs::read_to_string(&out_path).unwrap_or_default(),
        stderr: std::fs::read_to_string(&err_path).unwrap_or_default(),
    }
}

fn console_lines(stderr: &str) -> Vec<&str> {
    stderr.lines().filter(|l| l.contains(":CONSOLE")).collect()
}

/// RGB pixels of a PNG.
fn pixels(path: &Path) -> (u32, u32, Vec<[u8; 3]>) {
    let file = std::io::BufReader::new(std::fs::File::open(path).unwrap());
    let mut decoder = png::Decoder::new(file);
    decoder.set_transformations(png::Transformations::EXPAND | png::Transformations::STRIP_16);
    let mut reader = decoder.read_info().unwrap();
    let mut buf = vec![0; reader.output_buffer_size().unwrap()];
    let info = reader.next_frame(&mut buf).unwrap();
    let channels = match info.color_type {
        png::ColorType::Rgb => 3,
        png::ColorType::Rgba => 4,
        png::ColorType::GrayscaleAlpha => 2,
        _ => 1,
    };
    let px = buf[..info.buffer_size()]
        .chunks_exact(channels)
        .map(|c| if channels >= 3 { [c[0], c[1], c[2]] } else { [c[0], c[0], c[0]] })
        .collect();
    (info.width, info.height, px)
}

fn near(p: [u8; 3], c: style::Rgb) -> bool {
    let d = |a: u8, b: u8| (i32::from(a) - i32::from(b)).abs() <= COLOUR_TOLERANCE;
    d(p[0], c.0) && d(p[1], c.1) && d(p[2], c.2)
}

#[test]
fn demo_report_renders_in_headless_chromium() {
    if !enabled() {
        eprintln!("browser check not run: set QUORUM_BROWSER_TESTS=1 (CI does) with Debian's chromium installed");
        return;
    }
    let tmp = tempfile::tempdir().unwrap();

    // Self-test: a page with a blocked external image must produce a console line.
    let bad = tmp.path().join("bad.html");
    std::fs::write(
        &bad,
        "<!DOCTYPE html><html><head><meta http-equiv=\"Content-Security-Policy\" content=\"default-src 'none'\"/></head><body><p>x</p><img src=\"http://127.0.0.1:9/blocked.png\"/></body></html>",
    )
    .unwrap();
    let run = browse(&bad, &["--dump-dom".to_string()], tmp.path());
    assert!(run.ok, "chromium failed on the self-test page:\n{}", run.stderr);
    assert!(!console_lines(&run.stderr).is_empty(), "the console detector saw nothing on a page with a CSP violation");

    // The demo's report folder.
    let settings = Settings { quiet: true, ..Settings::default() };
    let folder_path = tmp.path().join("quorum-demo");
    let config = quorum::demo::config(settings, Format::Text, Some(folder_path.clone()));
    let analysis = quorum::analysis::run(&config).unwrap();
    folder::write_report(&folder_path, &analysis, None).unwrap();
    let page = folder_path.join("report.html");
    let n_plots = std::fs::read_dir(folder_path.join("plots")).unwrap().count();
    assert!(n_plots >= 6);

    let shot = tmp.path().join("report.png");
    let run =
        browse(&page, &[format!("--screenshot={}", shot.display()), "--window-size=1280,2400".to_string()], tmp.path());
    assert!(run.ok, "chromium failed:\n{}", run.stderr);
    let console = console_lines(&run.stderr);
    assert!(console.is_empty(), "console messages on report.html:\n{}", console.join("\n"));
    let (w, h, px) = pixels(&shot);
    assert_eq!((w, h), (1280, 2400));
    let ink = px.iter().filter(|p| p.iter().any(|&c| c < 235)).count() as f64 / px.len() as f64;
    assert!(ink > MIN_INK_SHARE, "the page looks blank: {:.1}% non-white pixels", 100.0 * ink);
    let header = style::PALETTE[0]; // the page's accent, #1b4f9c
    let top = &px[..(w * 60) as usize];
    assert!(top.iter().any(|p| near(*p, header)), "no header colour in the top rows: CSS not applied");
    let amber = style::PALETTE[1];
    assert!(px.iter().filter(|p| near(**p, amber)).count() > 50, "no plot colour on the page: SVG not rendered");
    eprintln!("screenshot: {} ({:.1}% ink)", shot.display(), 100.0 * ink);
    if let Ok(keep) = std::env::var("QUORUM_BROWSER_SCREENSHOT") {
        let _ = std::fs::copy(&shot, keep);
    }

    let run = browse(&page, &["--dump-dom".to_string()], tmp.path());
    assert!(run.ok, "chromium --dump-dom failed:\n{}", run.stderr);
    let console = console_lines(&run.stderr);
    assert!(console.is_empty(), "console messages on report.html:\n{}", console.join("\n"));
    let dom = run.stdout;
    for (id, title) in SECTIONS {
        assert!(dom.contains(&format!("<section id=\"{id}\">")), "section {id} missing from the DOM");
        assert!(dom.contains(title), "{title}");
    }
    assert_eq!(dom.matches("<svg").count(), n_plots, "inline SVGs in the DOM");
    assert!(!dom.to_lowercase().contains("<script"));
}

#[test]
fn hostile_labels_stay_text_in_headless_chromium() {
    if !enabled() {
        eprintln!("browser check not run: set QUORUM_BROWSER_TESTS=1 (CI does) with Debian's chromium installed");
        return;
    }
    let tmp = tempfile::tempdir().unwrap();
    // Invented data for a structure test: labels that are markup.
    let factor = "<script>document.title='x'</script>";
    let levels = ["<b>bold</b> & \"q\"", "]]><!-- 'c'"];
    let mut csv = String::from("\"<script>document.title='x'</script>\",site,score\n");
    for (i, l) in levels.iter().enumerate() {
        for site in ["Zürich ✓", "<img src=x>"] {
            for k in 0..6 {
                let y = 10.0 + f64::from(k) * 0.9 + i as f64;
                csv.push_str(&format!("\"{}\",\"{site}\",{y}\n", l.replace('"', "\"\"")));
            }
        }
    }
    let data = tmp.path().join("data.csv");
    std::fs::write(&data, csv).unwrap();
    let config = Config {
        job: Job::Analyze,
        data: DataSpec::new(Source::File(data), "score", &[factor, "site"]),
        settings: Settings {
            quiet: true,
            permutations: 199,
            max_permutations: 199,
            resamples: 199,
            ..Settings::default()
        },
        output: OutputSpec { format: Format::Json, report_dir: None },
        command: "test".into(),
    };
    let analysis = quorum::analysis::run(&config).unwrap();
    let folder_path = tmp.path().join("report");
    folder::write_report(&folder_path, &analysis, None).unwrap();

    let run = browse(&folder_path.join("report.html"), &["--dump-dom".to_string()], tmp.path());
    assert!(run.ok, "chromium --dump-dom failed:\n{}", run.stderr);
    let console = console_lines(&run.stderr);
    assert!(console.is_empty(), "console messages on the hostile report:\n{}", console.join("\n"));
    let dom = run.stdout.to_lowercase();
    assert!(dom.contains("<section id=\"data\">"), "the page did not load");
    for element in ["<script", "<b>", "<img"] {
        assert!(!dom.contains(element), "a label became an element: {element}");
    }
    // The browser serializes the labels' text escaped, so they were read as text.
    assert!(dom.contains("&lt;script&gt;document.title='x'&lt;/script&gt;"));
    assert!(dom.contains("&lt;b&gt;bold&lt;/b&gt; &amp; \"q\""));
    assert!(dom.contains("&lt;img src=x&gt;"));
    assert!(dom.contains("zürich ✓"));
    // The title stayed ours (no label ran as a script).
    assert!(!dom.contains("<title>x</title>"));
}
