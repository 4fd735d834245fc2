//! Figure-by-figure comparison of two reports (used by `iqaudit recheck`).
//!
//! Takes two report documents as JSON values and gives the list of key paths
//! whose values differ, e.g. `bursts[2].metrics.evm_rms_percent: 3.1 ≠ 3.2`.
//! Numbers are compared exactly: the analysis is deterministic, so a re-run of
//! the same capture and profile by the same tool version reproduces every figure
//! bit for bit.

use super::schema::Report;
use serde_json::Value;

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
pub fn differences(recorded: &Value, recomputed: &Value, skip: &[&str]) -> Vec<Difference> {
    let mut out = Vec::new();
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
) -> Result<Vec<Difference>, serde_json::Error> {
    let bursts = std::mem::take(&mut recomputed.bursts);
    let mut out = Vec::new();
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

fn walk(a: Option<&Value>, b: Option<&Value>, path: String, out: &mut Vec<Difference>) {
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
        assert_eq!(d.len(), 1);
        assert_eq!(d[0].path, "bursts[0].metrics.evm_rms_percent");
        assert!(d[0].to_string().contains("3.1"));
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
        assert_eq!(got.len(), 2);
        assert_eq!(got[0].path, "bursts[0].cfo_hz");
        let mut fewer = r.clone();
        fewer.bursts.pop();
        let got = report_differences(&v, fewer.clone(), &["command"]).unwrap();
        assert_eq!(got.len(), 1);
        assert_eq!(got[0].path, "bursts");
        assert_eq!(whole(&v, &fewer)[0].path, "bursts");
    }

    #[test]
    fn a_missing_burst_is_one_difference_at_the_list() {
        let a = json!({"bursts": [1, 2]});
        let b = json!({"bursts": [1]});
        let d = differences(&a, &b, &[]);
        assert_eq!(d.len(), 1);
        assert_eq!(d[0].path, "bursts");
    }
}
