//! Shared helpers: example circuits, reports written into scratch folders,
//! and reading numbers back from the page.

use std::path::{Path, PathBuf};

use fluxstep_netlist::Circuit;
use fluxstep_report::{write, Report, ReportOptions};
use serde_json::Value;

/// The path of an example circuit.
pub fn example(name: &str) -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("../../examples/circuits")
        .join(name)
}

/// Reads an example circuit.
pub fn circuit(name: &str) -> Circuit {
    let text = std::fs::read_to_string(example(name)).expect("example readable");
    Circuit::from_json(&text).expect("example valid")
}

/// Writes the report of `circuit` into a scratch folder named `tag`.
pub fn report_of(circuit: &Circuit, tag: &str, bytes: Option<Vec<u8>>) -> (Report, PathBuf) {
    let dir = Path::new(env!("CARGO_TARGET_TMPDIR")).join(format!("report-{tag}"));
    let opts = ReportOptions {
        name: tag.into(),
        input: bytes,
        loop_points: 40,
        ..ReportOptions::default()
    };
    let report = write(circuit, &opts, &dir).expect("the report is written");
    (report, dir)
}

/// The report of an example file.
pub fn example_report(name: &str) -> (Report, PathBuf) {
    let bytes = std::fs::read(example(name)).expect("example readable");
    let tag = name.trim_end_matches(".json");
    report_of(&circuit(name), tag, Some(bytes))
}

/// A value of an HTML attribute in a tag's text.
fn attr(tag: &str, name: &str) -> Option<String> {
    let at = tag.find(&format!(" {name}=\""))? + name.len() + 3;
    let end = tag[at..].find('"')? + at;
    Some(tag[at..end].to_string())
}

/// Every marked number of a page as (key, data-value, shown text), read
/// from the HTML text (the browser test reads them from the DOM).
pub fn marked(html: &str) -> Vec<(String, String, String)> {
    let mut out = vec![];
    let mut rest = html;
    while let Some(i) = rest.find("<span class=\"v\"") {
        let tag_end = rest[i..].find('>').expect("tag closes") + i;
        let tag = &rest[i..tag_end];
        let close = rest[tag_end..].find("</span>").expect("span closes") + tag_end;
        let text = rest[tag_end + 1..close].replace("&amp;", "&");
        out.push((
            attr(tag, "data-key")
                .expect("data-key")
                .replace("&amp;", "&"),
            attr(tag, "data-value").expect("data-value"),
            text,
        ));
        rest = &rest[close..];
    }
    out
}

/// Parses a number as the page shows it ("2.682 A", "18.14 mV",
/// "−12.3 °C", "1.2e−14", "46.4°", "99.71 %") into SI units, with the
/// half unit of its last digit (the rounding it may carry).
pub fn parse_shown(text: &str) -> Option<(f64, f64)> {
    let t = text.replace('−', "-");
    let end = t
        .char_indices()
        .find(|(i, c)| {
            !(c.is_ascii_digit()
                || *c == '.'
                || ((*c == '-' || *c == '+') && (*i == 0 || t[..*i].ends_with('e')))
                || (*c == 'e' && *i > 0))
        })
        .map(|(i, _)| i)
        .unwrap_or(t.len());
    let number: f64 = t[..end].parse().ok()?;
    let mantissa = t[..end].split('e').next().unwrap_or("");
    let decimals = mantissa.split_once('.').map(|(_, d)| d.len()).unwrap_or(0) as i32;
    let exponent: i32 = t[..end]
        .split_once('e')
        .and_then(|(_, e)| e.parse().ok())
        .unwrap_or(0);
    let unit = t[end..].trim();
    // A bare unit, or an SI prefix before one (or alone, for a number
    // without unit).
    let bare = [
        "", "°C", "°", "%", "K", "dB", "Hz", "Ω", "A", "V", "W", "J", "s", "F", "H",
    ];
    let scale = if bare.contains(&unit) {
        1.0
    } else {
        match unit.chars().next()? {
            'f' => 1e-15,
            'p' => 1e-12,
            'n' => 1e-9,
            'µ' | 'u' => 1e-6,
            'm' => 1e-3,
            'k' => 1e3,
            'M' => 1e6,
            'G' => 1e9,
            'T' => 1e12,
            _ => return None,
        }
    };
    let half = 0.5 * 10f64.powi(exponent - decimals) * scale;
    Some((number * scale, half))
}

/// Checks every marked number against the summary: the same bits under
/// its key, and the shown text equal to it up to the rounding of its last
/// digit; and every number of the summary is shown. Returns the count.
pub fn check_numbers(marks: &[(String, String, String)], summary: &Value) -> usize {
    for (key, value, text) in marks {
        let json = summary
            .pointer(key)
            .unwrap_or_else(|| panic!("{key} is not in summary.json"));
        if value == "null" {
            assert!(json.is_null(), "{key}: page null, summary {json}");
            assert_eq!(text, "—", "{key}");
            continue;
        }
        let v: f64 = value.parse().expect("data-value is a number");
        assert_eq!(json.as_f64(), Some(v), "{key}: page {v}, summary {json}");
        let (shown, half) =
            parse_shown(text).unwrap_or_else(|| panic!("{key}: cannot read {text:?}"));
        assert!(
            (shown - v).abs() <= half * (1.0 + 1e-9) + 1e-300,
            "{key}: shows {text:?} = {shown}, summary {v}"
        );
    }
    // Every number in the summary appears on the page.
    fn leaves(v: &Value, at: String, out: &mut Vec<String>) {
        match v {
            Value::Object(m) => {
                for (k, x) in m {
                    leaves(
                        x,
                        format!("{at}/{}", k.replace('~', "~0").replace('/', "~1")),
                        out,
                    )
                }
            }
            Value::Number(_) => out.push(at),
            _ => {}
        }
    }
    let mut all = vec![];
    leaves(summary, String::new(), &mut all);
    for k in &all {
        assert!(
            marks.iter().any(|m| &m.0 == k),
            "{k} is in summary.json but not on the page"
        );
    }
    marks.len()
}

#[test]
fn shown_numbers_parse_back_with_their_rounding() {
    let (v, h) = parse_shown("2.682 A").unwrap();
    assert!(v == 2.682 && (h - 5e-4).abs() < 1e-15);
    let (v, h) = parse_shown("18.14 mV").unwrap();
    assert!((v - 0.01814).abs() < 1e-15 && (h - 5e-6).abs() < 1e-18);
    assert_eq!(parse_shown("−12.3 °C").map(|x| x.0), Some(-12.3));
    let (v, _) = parse_shown("1.2e−14").unwrap();
    assert_eq!(v, 1.2e-14);
    assert_eq!(parse_shown("46.4°").map(|x| x.0), Some(46.4));
    assert_eq!(parse_shown("200.0 kHz").map(|x| x.0), Some(200e3));
    assert_eq!(parse_shown("53.57 µ").map(|x| x.0), Some(53.57e-6));
    assert_eq!(parse_shown("12 Ω").map(|x| x.0), Some(12.0));
}
