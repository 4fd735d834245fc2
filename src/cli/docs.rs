//! `iqaudit schema`: the JSON Schema of each document iqaudit writes.

use std::path::PathBuf;

use clap::Args;
use iqaudit::report::json_schema::{document, schema_text, DOCUMENTS};
use iqaudit::Error;

use super::Outcome;

/// Arguments of `iqaudit schema`.
#[derive(Debug, Args)]
pub struct SchemaArgs {
    /// Which document: report, info, summary-row, synth-truth or recheck.
    ///
    /// Without NAME (and without --out) the document kinds are listed.
    #[arg(value_name = "NAME")]
    pub name: Option<String>,

    /// Write the schemas (NAME's, or all of them) into this folder as
    /// NAME.schema.json instead of printing.
    #[arg(short = 'o', long, value_name = "DIR")]
    pub out: Option<PathBuf>,
}

fn usage(message: String) -> Error {
    Error::Usage { message }
}

/// Print or write the schemas.
pub fn run_schema(args: &SchemaArgs) -> Result<Outcome, Error> {
    let kinds: Vec<_> = match &args.name {
        Some(n) => vec![document(n).ok_or_else(|| {
            let names: Vec<&str> = DOCUMENTS.iter().map(|d| d.name).collect();
            usage(format!(
                "schema: unknown document '{n}'; expected one of {}",
                names.join(", ")
            ))
        })?],
        None => DOCUMENTS.to_vec(),
    };
    match (&args.out, &args.name) {
        (Some(dir), _) => {
            std::fs::create_dir_all(dir).map_err(|source| Error::Io {
                path: dir.clone(),
                source,
            })?;
            for k in &kinds {
                let path = dir.join(k.file);
                iqaudit::atomic::write_atomic(&path, schema_text(k).as_bytes())?;
            }
            Ok(Outcome::Ok)
        }
        (None, Some(_)) => {
            super::write_stdout(schema_text(&kinds[0]).as_bytes())?;
            Ok(Outcome::Ok)
        }
        (None, None) => {
            let mut text = String::new();
            for k in &kinds {
                text.push_str(&format!("{:<12} {:<24} {}\n", k.name, k.id, k.describes));
            }
            super::write_stdout(text.as_bytes())?;
            Ok(Outcome::Ok)
        }
    }
}
