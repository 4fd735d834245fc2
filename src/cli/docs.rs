//! `iqaudit schema`, `completions` and `man`: the JSON Schemas of the documents
//! iqaudit writes, shell completion scripts and man pages (clap_complete,
//! clap_mangen), all generated from the types so they cannot drift.

use std::path::PathBuf;

use clap::Args;
use iqaudit::report::json_schema::{document, schema_text, DOCUMENTS};
use iqaudit::Error;

use super::Outcome;

/// Arguments of `iqaudit schema`.
#[derive(Debug, Args)]
pub struct SchemaArgs {
    /// Which document: report, info, summary-row, burst-row, synth-truth or recheck.
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

/// Arguments of `iqaudit completions`.
#[derive(Debug, Args)]
pub struct CompletionsArgs {
    /// The shell: bash, zsh, fish, elvish or powershell.
    #[arg(value_name = "SHELL")]
    pub shell: clap_complete::Shell,
}

/// Print the completion script for a shell on stdout.
pub fn run_completions(args: &CompletionsArgs) -> Result<Outcome, Error> {
    let mut cmd = <super::Cli as clap::CommandFactory>::command();
    let mut buf = Vec::new();
    clap_complete::generate(args.shell, &mut cmd, "iqaudit", &mut buf);
    super::write_stdout(&buf)?;
    Ok(Outcome::Ok)
}

/// Arguments of `iqaudit man`.
#[derive(Debug, Args)]
pub struct ManArgs {
    /// Write iqaudit.1 and one iqaudit-COMMAND.1 per command into this folder
    /// instead of printing iqaudit.1.
    #[arg(short = 'o', long, value_name = "DIR")]
    pub out: Option<PathBuf>,
}

fn roff(cmd: clap::Command, title: &str) -> Result<Vec<u8>, Error> {
    let mut buf = Vec::new();
    clap_mangen::Man::new(cmd)
        .title(title.to_string())
        .render(&mut buf)
        .map_err(|source| Error::Io {
            path: PathBuf::from("<man page>"),
            source,
        })?;
    Ok(buf)
}

/// Print or write the man pages (roff).
pub fn run_man(args: &ManArgs) -> Result<Outcome, Error> {
    let mut cmd = <super::Cli as clap::CommandFactory>::command();
    cmd.build();
    let Some(dir) = &args.out else {
        super::write_stdout(&roff(cmd, "iqaudit")?)?;
        return Ok(Outcome::Ok);
    };
    std::fs::create_dir_all(dir).map_err(|source| Error::Io {
        path: dir.clone(),
        source,
    })?;
    for sub in cmd.get_subcommands().filter(|s| s.get_name() != "help") {
        let name = format!("iqaudit-{}", sub.get_name());
        let page = roff(sub.clone().version(env!("CARGO_PKG_VERSION")), &name)?;
        iqaudit::atomic::write_atomic(&dir.join(format!("{name}.1")), &page)?;
    }
    iqaudit::atomic::write_atomic(&dir.join("iqaudit.1"), &roff(cmd, "iqaudit")?)?;
    Ok(Outcome::Ok)
}
