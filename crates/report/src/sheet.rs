//! The page's numbers and their summary: every number shown is written
//! once, into the summary JSON at a pointer and into the page as a span
//! carrying that pointer, so the two cannot disagree.

use fluxstep_netlist::si::format_si_digits;
use serde_json::{Map, Value};

/// Collects the summary JSON while the page is written.
#[derive(Debug, Default)]
pub(crate) struct Sheet {
    pub summary: Value,
}

impl Sheet {
    pub fn new() -> Sheet {
        Sheet {
            summary: Value::Object(Map::new()),
        }
    }

    /// Sets the value at a JSON pointer (`/a/b/c`), creating objects on
    /// the way.
    pub fn set(&mut self, pointer: &str, value: Value) {
        let mut at = &mut self.summary;
        let keys: Vec<String> = pointer
            .split('/')
            .skip(1)
            .map(|k| k.replace("~1", "/").replace("~0", "~"))
            .collect();
        for (i, k) in keys.iter().enumerate() {
            if !at.is_object() {
                *at = Value::Object(Map::new());
            }
            let map = at.as_object_mut().expect("made an object just above");
            if i + 1 == keys.len() {
                map.insert(k.clone(), value);
                return;
            }
            at = map
                .entry(k.clone())
                .or_insert_with(|| Value::Object(Map::new()));
        }
    }

    /// A number with SI prefix and unit, four significant digits.
    pub fn si(&mut self, pointer: &str, value: f64, unit: &str) -> String {
        let text = if value.is_finite() {
            format_si_digits(value, unit, 4)
        } else {
            "—".into()
        };
        self.mark(pointer, value, text)
    }

    /// A number with a fixed count of decimals and a unit written after it
    /// (°C, °, dB, %, where SI prefixes would mislead).
    pub fn fixed(&mut self, pointer: &str, value: f64, decimals: usize, unit: &str) -> String {
        let text = if value.is_finite() {
            let sep = if unit.is_empty() || unit == "°" {
                ""
            } else {
                " "
            };
            format!("{value:.decimals$}{sep}{unit}").replace('-', "−")
        } else {
            "—".into()
        };
        self.mark(pointer, value, text)
    }

    /// A small dimensionless number in scientific notation (a residual).
    pub fn sci(&mut self, pointer: &str, value: f64) -> String {
        let text = if value.is_finite() {
            format!("{value:.1e}").replace('-', "−")
        } else {
            "—".into()
        };
        self.mark(pointer, value, text)
    }

    /// A count.
    pub fn count(&mut self, pointer: &str, value: usize) -> String {
        self.set(pointer, Value::from(value));
        format!(
            "<span class=\"v\" data-key=\"{}\" data-value=\"{value}\">{value}</span>",
            esc(pointer)
        )
    }

    fn mark(&mut self, pointer: &str, value: f64, text: String) -> String {
        let json = serde_json::Number::from_f64(value)
            .map(Value::Number)
            .unwrap_or(Value::Null);
        let data = match &json {
            Value::Number(_) => format!("{value:?}"),
            _ => "null".into(),
        };
        self.set(pointer, json);
        format!(
            "<span class=\"v\" data-key=\"{}\" data-value=\"{data}\">{}</span>",
            esc(pointer),
            esc(&text)
        )
    }
}

/// Escapes text for HTML content and attribute values.
pub(crate) fn esc(text: &str) -> String {
    let mut out = String::with_capacity(text.len());
    for c in text.chars() {
        match c {
            '&' => out.push_str("&amp;"),
            '<' => out.push_str("&lt;"),
            '>' => out.push_str("&gt;"),
            '"' => out.push_str("&quot;"),
            '\'' => out.push_str("&#39;"),
            c => out.push(c),
        }
    }
    out
}

/// A JSON pointer token for a name (`/` and `~` escaped as RFC 6901 says).
pub(crate) fn key(name: &str) -> String {
    name.replace('~', "~0").replace('/', "~1")
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn numbers_land_in_the_summary_at_their_pointer() {
        let mut s = Sheet::new();
        let html = s.si("/a/L1.current/max", 2.68, "A");
        assert!(html.contains("data-key=\"/a/L1.current/max\""), "{html}");
        assert!(html.contains("data-value=\"2.68\""), "{html}");
        assert!(html.contains("2.680 A"), "{html}");
        assert_eq!(
            s.summary.pointer("/a/L1.current/max"),
            Some(&Value::from(2.68))
        );
        let t = s.fixed("/t", -12.34, 1, "°C");
        assert!(t.contains("−12.3 °C"), "{t}");
        let n = s.si("/nan", f64::NAN, "V");
        assert!(n.contains("data-value=\"null\""), "{n}");
        assert_eq!(s.summary.pointer("/nan"), Some(&Value::Null));
    }

    #[test]
    fn text_is_escaped() {
        assert_eq!(
            esc("<a href=\"x\">&'"),
            "&lt;a href=&quot;x&quot;&gt;&amp;&#39;"
        );
    }
}
