//! The page in a real browser: headless Chromium loads a test-only copy
//! of each report with an inline checking script and dumps the DOM with
//! the script's findings.

use std::path::{Path, PathBuf};
use std::process::{Command, Stdio};
use std::time::{Duration, Instant};

use fluxstep_report::SECTIONS;
use serde_json::Value;

use crate::common::{check_numbers, example_report};

/// The printable width of A4 with the page's 10 mm side margins, in CSS
/// pixels (190 mm at 96 px per 25.4 mm).
const A4_TEXT_PX: f64 = 190.0 * 96.0 / 25.4;

/// Captures errors before anything else runs.
const CAPTURE: &str = r#"<script>
window.__errors = [];
window.addEventListener('error', function (e) { window.__errors.push(String(e.message)); });
var __ce = console.error;
console.error = function () { window.__errors.push(Array.prototype.join.call(arguments, ' ')); __ce.apply(console, arguments); };
</script>"#;

/// Measures the page at the window's width, then with the print rules
/// applied at the A4 printable width, and writes the findings as JSON.
const CHECK: &str = r#"<script>
(function () {
  function overflow(limit) {
    var bad = [];
    var all = document.body.querySelectorAll('*');
    for (var i = 0; i < all.length; i++) {
      var r = all[i].getBoundingClientRect();
      if (r.width > 0 && r.right > limit + 0.5) bad.push(all[i].tagName + ' ' + (all[i].id || all[i].className.baseVal || all[i].className || '') + ' ' + Math.round(r.right));
    }
    // The body's scroll width: the html element keeps the window's
    // width as its own scroll width even when set narrower.
    if (document.body.scrollWidth > limit + 0.5) bad.push('scrollWidth ' + document.body.scrollWidth);
    return bad.slice(0, 10);
  }
  function svgs() {
    var out = [];
    var list = document.querySelectorAll('svg');
    for (var i = 0; i < list.length; i++) {
      var r = list[i].getBoundingClientRect();
      out.push([r.width, r.height]);
    }
    return out;
  }
  var result = { errors: window.__errors };
  result.screen_width = document.documentElement.clientWidth;
  result.screen_overflow = overflow(document.documentElement.clientWidth);
  result.svg_screen = svgs();
  result.sections = Array.prototype.map.call(document.querySelectorAll('section'), function (s) { return s.id; });
  result.numbers = Array.prototype.map.call(document.querySelectorAll('[data-key]'), function (e) {
    return [e.getAttribute('data-key'), e.getAttribute('data-value'), e.textContent];
  });
  result.banner = (document.querySelector('main > .banner') || {}).className || null;
  // The print rules, applied on screen at the printable width.
  var css = '';
  for (var s = 0; s < document.styleSheets.length; s++) {
    var rules = document.styleSheets[s].cssRules;
    for (var k = 0; k < rules.length; k++) {
      if (rules[k].media && rules[k].media.mediaText === 'print') {
        for (var j = 0; j < rules[k].cssRules.length; j++) css += rules[k].cssRules[j].cssText + '\n';
      }
    }
  }
  result.print_rules = css.length;
  var st = document.createElement('style');
  st.textContent = css + '\nhtml { width: __A4__px; }';
  document.head.appendChild(st);
  result.print_overflow = overflow(__A4__);
  result.svg_print = svgs();
  var pre = document.createElement('pre');
  pre.id = 'fluxstep-check';
  pre.textContent = JSON.stringify(result);
  document.body.appendChild(pre);
})();
</script>"#;

fn chromium() -> Option<PathBuf> {
    let path = std::env::var_os("PATH")?;
    for dir in std::env::split_paths(&path) {
        for name in ["chromium", "chromium-browser"] {
            let p = dir.join(name);
            if p.is_file() {
                return Some(p);
            }
        }
    }
    None
}

/// Runs Chromium with `args`, killing it if it hangs (not a timing
/// assertion: a guard so a stuck browser fails the test instead of CI).
/// Its standard output goes through a file: a pipe that nobody reads
/// while waiting would fill up and stall it.
fn run(browser: &Path, args: &[String], out: &Path) -> String {
    let file = std::fs::File::create(out).expect("a file for chromium's output");
    let mut child = Command::new(browser)
        .args([
            "--headless",
            "--no-sandbox",
            "--disable-gpu",
            "--hide-scrollbars",
        ])
        .args(args)
        .stdin(Stdio::null())
        .stdout(file)
        .stderr(Stdio::null())
        .spawn()
        .expect("chromium starts");
    let deadline = Instant::now() + Duration::from_secs(120);
    loop {
        if child.try_wait().expect("chromium waits").is_some() {
            break;
        }
        if Instant::now() > deadline {
            let _ = child.kill();
            panic!("chromium did not finish within 120 s");
        }
        std::thread::sleep(Duration::from_millis(50));
    }
    String::from_utf8_lossy(&std::fs::read(out).expect("chromium's output")).into_owned()
}

/// Loads a test copy of `html` (with the capturing and checking scripts)
/// in Chromium: a screenshot, then the script's findings from the DOM.
fn findings(browser: &Path, dir: &Path, html: &str) -> (Value, PathBuf) {
    let html = html
        .replacen("<head>", &format!("<head>{CAPTURE}"), 1)
        .replacen(
            "</body>",
            &format!(
                "{}</body>",
                CHECK.replace("__A4__", &format!("{A4_TEXT_PX:.1}"))
            ),
            1,
        );
    let page = dir.join("report-check.html");
    std::fs::write(&page, html).unwrap();
    let url = format!("file://{}", page.canonicalize().unwrap().display());
    let shot = dir.join("report.png");
    let _ = std::fs::remove_file(&shot);
    run(
        browser,
        &[
            "--window-size=1280,3000".into(),
            format!("--screenshot={}", shot.display()),
            url.clone(),
        ],
        &dir.join("screenshot.log"),
    );

    let dom = run(
        browser,
        &[
            "--window-size=1280,3000".into(),
            "--virtual-time-budget=5000".into(),
            "--dump-dom".into(),
            url,
        ],
        &dir.join("dom.html"),
    );
    let start = dom
        .find("<pre id=\"fluxstep-check\">")
        .unwrap_or_else(|| panic!("the checking script wrote nothing"))
        + "<pre id=\"fluxstep-check\">".len();
    let end = dom[start..].find("</pre>").unwrap() + start;
    let text = dom[start..end]
        .replace("&quot;", "\"")
        .replace("&lt;", "<")
        .replace("&gt;", ">")
        .replace("&amp;", "&");
    let r: Value = serde_json::from_str(&text).expect("findings are JSON");
    (r, shot)
}

#[test]
fn reports_render_in_headless_chromium() {
    let Some(browser) = chromium() else {
        if std::env::var_os("CI").is_some() {
            panic!("chromium is not installed, and CI is set: .ci/run installs it (apt-get install chromium)");
        }
        eprintln!(
            "SKIPPED reports_render_in_headless_chromium: no `chromium` on PATH \
             (install Debian's chromium package; under CI=1 this test fails instead)"
        );
        return;
    };
    for name in ["buck.json", "voltage_mode_buck.json"] {
        let (report, dir) = example_report(name);
        let (r, shot) = findings(&browser, &dir, &report.html);
        let png = std::fs::read(&shot).expect("a screenshot");
        assert!(
            png.starts_with(b"\x89PNG") && png.len() > 10_000,
            "{name}: screenshot"
        );
        assert_eq!(r["errors"], serde_json::json!([]), "{name}: console errors");
        let sections: Vec<&str> = r["sections"]
            .as_array()
            .unwrap()
            .iter()
            .map(|s| s.as_str().unwrap())
            .collect();
        let expected: Vec<&str> = SECTIONS.iter().map(|s| s.0).collect();
        assert_eq!(sections, expected, "{name}: sections");
        assert_eq!(r["screen_width"].as_f64(), Some(1280.0), "{name}");
        for key in ["svg_screen", "svg_print"] {
            let svgs = r[key].as_array().unwrap();
            assert!(!svgs.is_empty(), "{name}: no SVG");
            for s in svgs {
                assert!(
                    s[0].as_f64().unwrap() > 10.0 && s[1].as_f64().unwrap() > 10.0,
                    "{name}: {key} has an SVG of size {s}"
                );
            }
        }
        assert!(
            r["print_rules"].as_u64().unwrap() > 0,
            "{name}: no print rules found"
        );
        assert_eq!(
            r["screen_overflow"],
            serde_json::json!([]),
            "{name}: at 1280 px"
        );
        assert_eq!(
            r["print_overflow"],
            serde_json::json!([]),
            "{name}: at the A4 width"
        );
        let marks: Vec<(String, String, String)> = r["numbers"]
            .as_array()
            .unwrap()
            .iter()
            .map(|m| {
                (
                    m[0].as_str().unwrap().to_string(),
                    m[1].as_str().unwrap().to_string(),
                    m[2].as_str().unwrap().to_string(),
                )
            })
            .collect();
        let summary: Value =
            serde_json::from_str(&std::fs::read_to_string(dir.join("summary.json")).unwrap())
                .unwrap();
        let n = check_numbers(&marks, &summary);
        assert!(n > 20, "{name}: {n} numbers");
    }
    // The checks can fail: a block wider than the A4 text overflows there,
    // and a script error is caught.
    let dir = Path::new(env!("CARGO_TARGET_TMPDIR")).join("report-wide");
    std::fs::create_dir_all(&dir).unwrap();
    let wide = "<!DOCTYPE html><html><head><style>@media print { p { color: black; } }</style></head>\
                <body><div style=\"width: 900px\">wide</div><script>nothing.here();</script></body></html>";
    let (r, _) = findings(&browser, &dir, wide);
    assert_eq!(r["screen_overflow"], serde_json::json!([]));
    assert_ne!(r["print_overflow"], serde_json::json!([]));
    assert_ne!(r["errors"], serde_json::json!([]));
}
