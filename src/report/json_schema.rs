//! JSON Schema documents (draft 2020-12) of every JSON file iqaudit writes,
//! derived from the Rust types that serialise them (`schemars`), so a schema
//! cannot drift from the output. `iqaudit schema NAME` prints one;
//! `iqaudit schema --out DIR` writes them all; docs/schemas/ ships them.
//!
//! Every document names its schema with one scheme, `iqaudit.NAME/VERSION`,
//! and its writer as `tool: {name, version}` (the batch summary's rows carry
//! neither: a row is one line of a table whose schema is named here). In each
//! schema the `schema` key is pinned to the document's id with `const`, so a
//! document of another version does not validate.

use schemars::generate::SchemaSettings;
use schemars::JsonSchema;
use serde_json::Value;

/// One JSON document kind iqaudit writes.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct DocumentKind {
    /// Short name, as `iqaudit schema NAME` takes it.
    pub name: &'static str,
    /// Schema id written in the document's `schema` key (the row schema of the
    /// batch summary has no such key).
    pub id: &'static str,
    /// File name under docs/schemas/ and `schema --out`.
    pub file: &'static str,
    /// Which files follow the schema.
    pub describes: &'static str,
}

/// Every document kind, in the order `iqaudit schema --list` gives them.
pub const DOCUMENTS: [DocumentKind; 6] = [
    DocumentKind {
        name: "report",
        id: super::schema::SCHEMA,
        file: "report.schema.json",
        describes: "the report of `analyse --report` and batch's CAPTURE.report.json",
    },
    DocumentKind {
        name: "info",
        id: crate::capture::stats::INFO_SCHEMA,
        file: "info.schema.json",
        describes: "`info --json`",
    },
    DocumentKind {
        name: "summary-row",
        id: crate::batch::summary::SUMMARY_ROW_SCHEMA,
        file: "summary-row.schema.json",
        describes: "one line of batch's summary.jsonl (the CSV has the same columns)",
    },
    DocumentKind {
        name: "burst-row",
        id: crate::batch::bursts::BURST_ROW_SCHEMA,
        file: "burst-row.schema.json",
        describes: "one line of batch's bursts.jsonl (the CSV has the same columns)",
    },
    DocumentKind {
        name: "synth-truth",
        id: crate::synth::TRUTH_SCHEMA,
        file: "synth-truth.schema.json",
        describes: "synth's FILE.truth.json",
    },
    DocumentKind {
        name: "recheck",
        id: crate::recheck::RECHECK_SCHEMA,
        file: "recheck.schema.json",
        describes: "`recheck --json`",
    },
];

/// The document kind called `name` (see [`DOCUMENTS`]).
pub fn document(name: &str) -> Option<DocumentKind> {
    DOCUMENTS.iter().copied().find(|d| d.name == name)
}

fn root<T: JsonSchema>(kind: &DocumentKind) -> Value {
    let generator = SchemaSettings::draft2020_12().into_generator();
    let mut v = generator.into_root_schema_for::<T>().to_value();
    if let Some(o) = v.as_object_mut() {
        o.insert("title".into(), Value::from(kind.id));
        o.insert(
            "description".into(),
            Value::from(format!(
                "{}: {} (generated from the Rust types; `iqaudit schema {}`)",
                kind.id, kind.describes, kind.name
            )),
        );
        if let Some(props) = o.get_mut("properties").and_then(Value::as_object_mut) {
            if props.contains_key("schema") && !kind.name.ends_with("-row") {
                props.insert(
                    "schema".into(),
                    serde_json::json!({"description": "The schema id.", "const": kind.id}),
                );
            }
        }
    }
    v
}

/// The JSON Schema of one document kind.
pub fn schema_of(kind: &DocumentKind) -> Value {
    match kind.name {
        "report" => root::<super::schema::Report>(kind),
        "info" => root::<crate::capture::stats::InfoReport>(kind),
        "summary-row" => root::<crate::batch::summary::SummaryRow>(kind),
        "burst-row" => root::<crate::batch::bursts::BurstRow>(kind),
        "synth-truth" => root::<crate::synth::GroundTruth>(kind),
        _ => root::<crate::recheck::RecheckDocument>(kind),
    }
}

/// A schema as written to a file: pretty JSON with a final newline.
pub fn schema_text(kind: &DocumentKind) -> String {
    let mut s = serde_json::to_string_pretty(&schema_of(kind)).unwrap_or_default();
    s.push('\n');
    s
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_shipped_schemas_are_the_generated_ones() {
        // docs/schemas/ must be regenerated (`iqaudit schema --out docs/schemas`)
        // whenever a document's Rust type changes.
        let dir = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("docs/schemas");
        for kind in DOCUMENTS {
            let shipped = std::fs::read_to_string(dir.join(kind.file)).unwrap_or_default();
            assert!(
                shipped == schema_text(&kind),
                "docs/schemas/{} is stale: run `cargo run --release -- schema --out docs/schemas`",
                kind.file
            );
        }
    }

    #[test]
    fn the_schema_key_is_pinned_and_unknown_keys_are_refused() {
        let s = schema_of(&document("report").unwrap());
        assert_eq!(
            s["properties"]["schema"]["const"],
            super::super::schema::SCHEMA
        );
        assert_eq!(s["additionalProperties"], Value::Bool(false));
        assert!(s["required"]
            .as_array()
            .unwrap()
            .iter()
            .any(|k| k == "bursts"));
        let names: Vec<&str> = DOCUMENTS.iter().map(|d| d.id).collect();
        for id in names {
            let (name, version) = id.split_once('/').unwrap();
            assert!(name.starts_with("iqaudit."), "{id}");
            assert!(version.parse::<u32>().is_ok(), "{id}");
        }
    }
}
