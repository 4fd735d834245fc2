//! Figure-by-figure comparison of two reports (used by `iqaudit recheck`).
//!
//! Takes two report documents as JSON values and gives the list of key paths
//! whose values differ, e.g. `bursts[2].metrics.evm_rms_percent: 3.1 ≠ 3.2`.
//! Numbers are compared as numbers, exactly: the analysis is deterministic, so a
//! re-run of the same capture and profile by the same tool version reproduces
//! every figure bit for bit. How a number is spelt does not matter — `0`, `0.0`,
//! `-0.0` and `0e0` are one value, and `1.5` written as `1.50` or `15e-1` by a
//! re-serialising tool (jq, Python's `json`, JavaScript's `JSON.stringify`) is
//! still `1.5` — but two numbers one unit in the last place apart differ.
//!
//! At most [`MAX_KEPT_DIFFERENCES`] differences are kept (the first ones in
//! document order); the total is always counted.

use super::schema::Report;
use serde_json::{Number, Value};

/// Most differences kept in a [`Differences`] list; the rest are only counted,
/// so a report that differs everywhere costs bounded memory.
pub const MAX_KEPT_DIFFERENCES: usize = 1000;

/// The differences found: the first [`MAX_KEPT_DIFFERENCES`] in document order
/// and the total count.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Differences {
    /// The first differences found, in document order.
    pub kept: Vec<Difference>,
    /// How many differences there are in all (`kept.len()` or more).
    pub total: usize,
}

impl Differences {
    /// True when nothing differs.
    pub fn is_empty(&self) -> bool {
        self.total == 0
    }

    fn push(&mut self, d: Difference) {
        self.total += 1;
        if self.kept.len() < MAX_KEPT_DIFFERENCES {
            self.kept.push(d);
        }
    }

    fn extend(&mut self, other: Differences) {
        let more = other.total - other.kept.len();
        for d in other.kept {
            self.push(d);
        }
        self.total += more;
    }
}

/// Whether two JSON numbers are the same value, whatever their spelling.
///
/// Two integers compare exactly; otherwise both must convert to the same `f64`
/// (IEEE equality: `0 == -0`, one ulp apart is different), and an integer too
/// large for an `f64` to hold exactly equals only the float that is exactly it.
pub fn numbers_equal(a: &Number, b: &Number) -> bool {
    if let (Some(x), Some(y)) = (a.as_i64(), b.as_i64()) {
        return x == y;
    }
    if let (Some(x), Some(y)) = (a.as_u64(), b.as_u64()) {
        return x == y;
    }
    let (Some(x), Some(y)) = (a.as_f64(), b.as_f64()) else {
        return false;
    };
    if x != y {
        return false;
    }
    // Same f64; an integer beyond 2^53 may have been rounded to reach it.
    let exact = |n: &Number, f: f64| match n.as_i64().map(i128::from).or(n.as_u64().map(i128::from))
    {
        Some(i) => f as i128 == i,
        None => true,
    };
    exact(a, y) && exact(b, x)
}

/// One difference between the recorded and the re-computed report.
#[derive(Debug, Clone, PartialEq)]
pub struct Difference {
    /// JSON path of the figure, e.g. `bursts[0].cfo_hz`.
    pub path: String,
    /// Value in the recorded report (compact JSON), or `absent`.
    pub recorded: String,
    /// Value from the re-run, or `absent`.
    pub recomputed: String,
}

impl std::fmt::Display for Difference {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        write!(
            f,
            "{}: recorded {} but re-run gives {}",
            self.path, self.recorded, self.recomputed
        )
    }
}

/// Every path at which `recorded` and `recomputed` differ, in document order.
/// Keys listed in `skip` (top-level only, e.g. `command`) are not compared.
pub fn differences(recorded: &Value, recomputed: &Value, skip: &[&str]) -> Differences {
    let mut out = Differences::default();
    match (recorded, recomputed) {
        (Value::Object(a), Value::Object(b)) => {
            let keys: std::collections::BTreeSet<&String> = a.keys().chain(b.keys()).collect();
            for k in keys {
                if skip.contains(&k.as_str()) {
                    continue;
                }
                walk(a.get(k), b.get(k), k.clone(), &mut out);
            }
        }
        _ => walk(Some(recorded), Some(recomputed), String::new(), &mut out),
    }
    out
}

/// [`differences`] between a recorded report document and a re-computed
/// [`Report`], converting the re-computed bursts to JSON one at a time instead
/// of the whole report at once, so a re-check holds one document tree (the
/// recorded one), not two. Same paths and order as [`differences`] on the whole
/// document (`bursts` sorts first among the top-level keys).
///
/// # Errors
/// A re-computed value that cannot be converted to JSON.
pub fn report_differences(
    recorded: &Value,
    mut recomputed: Report,
    skip: &[&str],
) -> Result<Differences, serde_json::Error> {
    let bursts = std::mem::take(&mut recomputed.bursts);
    let mut out = Differences::default();
    if !skip.contains(&"bursts") {
        match recorded.get("bursts") {
            Some(Value::Array(rec)) if rec.len() == bursts.len() => {
                for (i, (r, b)) in rec.iter().zip(&bursts).enumerate() {
                    let b = serde_json::to_value(b)?;
                    walk(Some(r), Some(&b), format!("bursts[{i}]"), &mut out);
                }
            }
            rec => out.push(Difference {
                path: "bursts".into(),
                recorded: match rec {
                    Some(Value::Array(a)) => format!("{} bursts", a.len()),
                    other => show(other),
                },
                recomputed: format!("{} bursts", bursts.len()),
            }),
        }
    }
    drop(bursts);
    let mut rest = serde_json::to_value(&recomputed)?;
    let mut skip_rest: Vec<&str> = skip.to_vec();
    skip_rest.push("bursts");
    if let Value::Object(m) = &mut rest {
        m.remove("bursts");
    }
    out.extend(differences(recorded, &rest, &skip_rest));
    Ok(out)
}

fn show(v: Option<&Value>) -> String {
    match v {
        None => "absent".into(),
        Some(v) => {
            let s = v.to_string();
            if s.len() > 80 {
                format!(
                    "{}…",
                    &s[..s.char_indices().nth(77).map(|c| c.0).unwrap_or(s.len())]
                )
            } else {
                s
            }
        }
    }
}

fn walk(a: Option<&Value>, b: Option<&Value>, path: String, out: &mut Differences) {
    match (a, b) {
        (Some(Value::Object(x)), Some(Value::Object(y))) => {
            let keys: std::collections::BTreeSet<&String> = x.keys().chain(y.keys()).collect();
            for k in keys {
                walk(x.get(k), y.get(k), format!("{path}.{k}"), out);
            }
        }
        (Some(Value::Array(x)), Some(Value::Array(y))) if x.len() == y.len() => {
            for (i, (p, q)) in x.iter().zip(y).enumerate() {
                walk(Some(p), Some(q), format!("{path}[{i}]"), out);
            }
        }
        (Some(Value::Number(x)), Some(Value::Number(y))) if numbers_equal(x, y) => {}
        (a, b) if a == b => {}
        (a, b) => out.push(Difference {
            path,
            recorded: show(a),
            recomputed: show(b),
        }),
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use serde_json::json;

    #[test]
    fn an_edited_figure_is_reported_with_its_path() {
        let a = json!({"command": ["x"], "bursts": [{"metrics": {"evm_rms_percent": 3.1}}]});
        let b = json!({"command": ["y"], "bursts": [{"metrics": {"evm_rms_percent": 3.2}}]});
        let d = differences(&a, &b, &["command"]);
        assert_eq!(d.total, 1);
        assert_eq!(d.kept[0].path, "bursts[0].metrics.evm_rms_percent");
        assert!(d.kept[0].to_string().contains("3.1"));
        assert!(differences(&a, &a, &[]).is_empty());
    }

    /// The committed fuzz seed: a real report written by `iqaudit analyse`.
    fn seed() -> (Value, Report) {
        let text = include_str!("../../fuzz/seeds/report/small-report.json");
        let v: Value = serde_json::from_str(text).unwrap();
        let r: Report = serde_json::from_value(v.clone()).unwrap();
        (v, r)
    }

    #[test]
    fn comparing_burst_by_burst_finds_what_comparing_whole_documents_finds() {
        let (v, r) = seed();
        assert!(!r.bursts.is_empty());
        // Slow twin: the whole re-computed document as one JSON tree.
        let whole = |rec: &Value, again: &Report| {
            differences(rec, &serde_json::to_value(again).unwrap(), &["command"])
        };
        assert!(report_differences(&v, r.clone(), &["command"])
            .unwrap()
            .is_empty());
        let mut edited = v.clone();
        edited["bursts"][0]["cfo_hz"] = json!(123.25);
        edited["summary"]["bursts"] = json!(99);
        edited["command"] = json!(["elsewhere"]);
        let got = report_differences(&edited, r.clone(), &["command"]).unwrap();
        assert_eq!(got, whole(&edited, &r));
        assert_eq!(got.total, 2);
        assert_eq!(got.kept[0].path, "bursts[0].cfo_hz");
        let mut fewer = r.clone();
        fewer.bursts.pop();
        let got = report_differences(&v, fewer.clone(), &["command"]).unwrap();
        assert_eq!(got.total, 1);
        assert_eq!(got.kept[0].path, "bursts");
        assert_eq!(whole(&v, &fewer).kept[0].path, "bursts");
    }

    #[test]
    fn a_missing_burst_is_one_difference_at_the_list() {
        let a = json!({"bursts": [1, 2]});
        let b = json!({"bursts": [1]});
        let d = differences(&a, &b, &[]);
        assert_eq!(d.total, 1);
        assert_eq!(d.kept[0].path, "bursts");
    }

    #[test]
    fn numbers_compare_as_numbers_whatever_their_spelling() {
        // JSON (RFC 8259 §6) has one number type; `0`, `0.0`, `-0.0` and
        // `0e0` name the same value for any consumer that reads them as
        // IEEE 754 doubles (IEEE 754-2019 §5.11: +0 and −0 compare equal).
        let parse = |t: &str| -> Value { serde_json::from_str(t).unwrap() };
        for (a, b) in [
            ("0", "0.0"),
            ("0", "-0.0"),
            ("-0", "0e0"),
            ("1.5", "15e-1"),
            ("1.50", "1.5"),
            ("3", "3.0"),
            ("1e-5", "0.00001"),
            ("1024", "1.024e3"),
        ] {
            let d = differences(&parse(a), &parse(b), &[]);
            assert!(d.is_empty(), "{a} vs {b}: {:?}", d.kept);
        }
        // One ulp apart is a difference, at either end of the range.
        for x in [1.0_f64, 3.1, 1e-300, 123456.789, -2.5e10, f64::MIN_POSITIVE] {
            let next = f64::from_bits(x.to_bits() + 1);
            let d = differences(&json!(x), &json!(next), &[]);
            assert_eq!(d.total, 1, "{x} vs {next}");
        }
        // Integers compare exactly, also beyond 2^53 where an f64 rounds.
        assert_eq!(
            differences(&json!(1u64 << 60), &json!((1u64 << 60) + 1), &[]).total,
            1
        );
        let big = parse("9007199254740993");
        assert_eq!(
            differences(&big, &json!(9007199254740992.0_f64), &[]).total,
            1
        );
        assert!(differences(
            &parse("9007199254740992"),
            &json!(9007199254740992.0_f64),
            &[]
        )
        .is_empty());
        // A number is never a string or null.
        assert_eq!(differences(&json!(0), &json!("0"), &[]).total, 1);
        assert_eq!(differences(&json!(0), &Value::Null, &[]).total, 1);
    }

    #[test]
    fn the_list_is_capped_but_every_difference_is_counted() {
        let n = MAX_KEPT_DIFFERENCES + 37;
        let a = Value::Array((0..n).map(|i| json!(i)).collect());
        let b = Value::Array((0..n).map(|i| json!(i + 1)).collect());
        let d = differences(&a, &b, &[]);
        assert_eq!(d.total, n);
        assert_eq!(d.kept.len(), MAX_KEPT_DIFFERENCES);
        assert_eq!(d.kept[0].path, "[0]");
    }

    #[test]
    fn reports_re_serialised_by_jq_python_and_node_compare_equal_and_a_tampered_figure_does_not() {
        // tests/vectors/reserialised/reserialise.sh made these three files from
        // report.json with jq 1.6, CPython's json module and node's JSON
        // (the script names each tool's number formatting).
        let parse = |t: &str| -> Value { serde_json::from_str(t).unwrap() };
        let original_text = include_str!("../../tests/vectors/reserialised/report.json");
        let original = parse(original_text);
        for (tool, text, respelt) in [
            (
                "jq",
                include_str!("../../tests/vectors/reserialised/report.jq.json"),
                true,
            ),
            (
                "python",
                include_str!("../../tests/vectors/reserialised/report.python.json"),
                false,
            ),
            (
                "node",
                include_str!("../../tests/vectors/reserialised/report.node.json"),
                true,
            ),
        ] {
            let again = parse(text);
            assert!(text != original_text, "{tool}: the file is the original");
            // jq and node spell `0.0` as `0`: comparing JSON values as values
            // (the old way) finds differences. (CPython's float repr keeps `.0`.)
            assert_eq!(again != original, respelt, "{tool}");
            let d = differences(&original, &again, &[]);
            assert!(d.is_empty(), "{tool}: {:?}", &d.kept[..d.kept.len().min(3)]);
            // One figure moved by one ulp is still caught, at its path.
            let mut tampered = again.clone();
            let cfo = tampered["bursts"][0]["cfo_hz"].as_f64().unwrap();
            tampered["bursts"][0]["cfo_hz"] = json!(f64::from_bits(cfo.to_bits() + 1));
            let d = differences(&original, &tampered, &[]);
            assert_eq!(d.total, 1, "{tool}");
            assert_eq!(d.kept[0].path, "bursts[0].cfo_hz");
        }
    }
}
