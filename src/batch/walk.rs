//! Finding the captures under a folder.
//!
//! Takes in: the batch folder, an optional folder to leave out (the output
//! folder when it sits inside the batch folder) and `--glob` patterns. Gives
//! out: the candidate captures sorted by relative path (`/`-separated, byte
//! order) with their sizes, plus entries for sub-folders that could not be
//! listed (they become `unreadable` rows, never a fatal error).
//!
//! A file is a capture candidate when its extension (case-insensitive) is one of
//! [`CAPTURE_EXTENSIONS`]: the formats the `capture` module recognises by name,
//! plus `.bin`, `.raw`, `.iq` and `.dat` whose sample format must come from the
//! profile or a SigMF sidecar. A `.sigmf-meta` file is a sidecar, not a capture;
//! `*.profile.json`, `*.truth.json`, `*.report.json` and every other file are
//! ignored (counted, not listed). Symbolic links to files are followed;
//! symbolic links to folders are not (no loops, no double counting).

use super::glob::Glob;
use std::fs;
use std::io;
use std::path::{Path, PathBuf};

/// Extensions of capture candidates (lower case, without the dot).
pub const CAPTURE_EXTENSIONS: [&str; 14] = [
    "cf32",
    "cfile",
    "cf64",
    "ci16",
    "cs16",
    "ci8",
    "cs8",
    "cu8",
    "wav",
    "sigmf-data",
    "bin",
    "raw",
    "iq",
    "dat",
];

/// Whether a file name is a capture candidate (see the module documentation).
pub fn is_capture_name(name: &str) -> bool {
    let lower = name.to_ascii_lowercase();
    if lower.ends_with(".profile.json")
        || lower.ends_with(".truth.json")
        || lower.ends_with(".report.json")
        || lower.ends_with(".sigmf-meta")
    {
        return false;
    }
    match lower.rsplit_once('.') {
        Some((stem, ext)) if !stem.is_empty() => CAPTURE_EXTENSIONS.contains(&ext),
        _ => false,
    }
}

/// One capture candidate (or an unlistable folder).
#[derive(Debug, Clone)]
pub(crate) struct Entry {
    /// Relative path, `/`-separated (lossy for non-UTF-8 names).
    pub rel: String,
    /// Relative path as an OS path (exact).
    pub rel_os: PathBuf,
    /// Full path (batch folder joined with `rel_os`).
    pub full: PathBuf,
    /// Size in bytes (0 when unknown).
    pub bytes: u64,
    /// Set when the entry could not be examined during the walk.
    pub walk_error: Option<String>,
}

/// The result of a walk.
#[derive(Debug, Default)]
pub(crate) struct Walk {
    pub entries: Vec<Entry>,
    /// Files that are not capture candidates or do not match `--glob`.
    pub ignored: usize,
}

fn rel_string(rel: &Path) -> String {
    rel.components()
        .map(|c| c.as_os_str().to_string_lossy())
        .collect::<Vec<_>>()
        .join("/")
}

/// Walk `root` recursively. Only failing to list `root` itself is an error.
pub(crate) fn walk(root: &Path, skip_dir: Option<&Path>, globs: &[Glob]) -> io::Result<Walk> {
    let mut out = Walk::default();
    let mut stack: Vec<PathBuf> = vec![PathBuf::new()];
    let mut first = true;
    while let Some(rel_dir) = stack.pop() {
        let dir = root.join(&rel_dir);
        let reader = match fs::read_dir(&dir) {
            Ok(r) => r,
            Err(e) if first => return Err(e),
            Err(e) => {
                out.entries.push(dir_error(root, &rel_dir, &e));
                continue;
            }
        };
        first = false;
        let mut subdirs = Vec::new();
        for item in reader {
            let item = match item {
                Ok(i) => i,
                Err(e) => {
                    out.entries.push(dir_error(root, &rel_dir, &e));
                    break;
                }
            };
            let rel = rel_dir.join(item.file_name());
            let full = root.join(&rel);
            let ft = match item.file_type() {
                Ok(t) => t,
                Err(e) => {
                    out.entries.push(file_error(&rel, full, &e));
                    continue;
                }
            };
            if ft.is_dir() {
                let skip = skip_dir.is_some_and(|s| fs::canonicalize(&full).is_ok_and(|c| c == s));
                if !skip {
                    subdirs.push(rel);
                }
                continue;
            }
            let name = item.file_name().to_string_lossy().into_owned();
            if !is_capture_name(&name) {
                out.ignored += 1;
                continue;
            }
            let rel_s = rel_string(&rel);
            if !globs.is_empty() && !globs.iter().any(|g| g.is_match(&rel_s)) {
                out.ignored += 1;
                continue;
            }
            // Follows a symlink to its file; a link to a folder or a dangling link
            // is reported rather than silently dropped.
            match fs::metadata(&full) {
                Ok(m) if m.is_file() => out.entries.push(Entry {
                    rel: rel_s,
                    rel_os: rel,
                    full,
                    bytes: m.len(),
                    walk_error: None,
                }),
                Ok(_) => out.ignored += 1,
                Err(e) => out.entries.push(file_error(&rel, full, &e)),
            }
        }
        // Depth-first, in name order once sorted below.
        stack.extend(subdirs);
    }
    out.entries
        .sort_by(|a, b| a.rel.as_bytes().cmp(b.rel.as_bytes()));
    Ok(out)
}

fn dir_error(root: &Path, rel_dir: &Path, e: &io::Error) -> Entry {
    Entry {
        rel: rel_string(rel_dir),
        rel_os: rel_dir.to_path_buf(),
        full: root.join(rel_dir),
        bytes: 0,
        walk_error: Some(format!("cannot list folder: {e}")),
    }
}

fn file_error(rel: &Path, full: PathBuf, e: &io::Error) -> Entry {
    Entry {
        rel: rel_string(rel),
        rel_os: rel.to_path_buf(),
        full,
        bytes: 0,
        walk_error: Some(format!("cannot read: {e}")),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn capture_extensions_are_recognised_and_sidecars_and_json_are_not() {
        for yes in [
            "a.cf32",
            "a.CFILE",
            "a.cf64",
            "a.ci16",
            "a.cs16",
            "a.ci8",
            "a.cs8",
            "a.cu8",
            "a.wav",
            "a.sigmf-data",
            "x.y.bin",
            "a.raw",
            "a.iq",
            "a.dat",
        ] {
            assert!(is_capture_name(yes), "{yes}");
        }
        for no in [
            "a.sigmf-meta",
            "a.profile.json",
            "a.truth.json",
            "a.cf32.report.json",
            "notes.txt",
            "cf32",
            ".cf32",
            "summary.csv",
            "a.cf32.tmp",
        ] {
            assert!(!is_capture_name(no), "{no}");
        }
    }

    #[test]
    fn the_walk_finds_nested_captures_in_path_order_and_skips_the_output_folder() {
        let dir = tempfile::tempdir().unwrap();
        let root = dir.path();
        for p in [
            "b.cf32",
            "a/z.cu8",
            "a/b/c.wav",
            "a/notes.txt",
            "out/x.cf32",
            "a/c.sigmf-meta",
        ] {
            let full = root.join(p);
            fs::create_dir_all(full.parent().unwrap()).unwrap();
            fs::write(&full, b"12345678").unwrap();
        }
        let skip = fs::canonicalize(root.join("out")).unwrap();
        let w = walk(root, Some(&skip), &[]).unwrap();
        let rels: Vec<&str> = w.entries.iter().map(|e| e.rel.as_str()).collect();
        assert_eq!(rels, ["a/b/c.wav", "a/z.cu8", "b.cf32"]);
        assert_eq!(w.ignored, 2);
        assert!(w
            .entries
            .iter()
            .all(|e| e.bytes == 8 && e.walk_error.is_none()));

        let g = [Glob::new("a/**").unwrap()];
        let w = walk(root, Some(&skip), &g).unwrap();
        let rels: Vec<&str> = w.entries.iter().map(|e| e.rel.as_str()).collect();
        assert_eq!(rels, ["a/b/c.wav", "a/z.cu8"]);
    }

    #[test]
    fn a_missing_folder_is_an_error() {
        let dir = tempfile::tempdir().unwrap();
        assert!(walk(&dir.path().join("nope"), None, &[]).is_err());
    }
}
