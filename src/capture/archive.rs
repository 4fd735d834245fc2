//! SigMF archives (`NAME.sigmf`, a tar file): locate the recording inside.
//!
//! Takes in: an open archive file. Gives out: the one recording it holds — its
//! metadata (read into memory, bounded by the sidecar size limit) and the byte
//! offset and length of its `.sigmf-data` member inside the archive, so that the
//! samples are read in place through the archive's memory map, never extracted.
//! The tar index is read by the `tar` crate (headers only: data members are
//! skipped by seeking).
//!
//! SigMF specification v1.2.5 §"Archive" (shared/REFERENCE-VALUES.md §10): a tar
//! file holding, in a folder, `NAME.sigmf-meta` and its `NAME.sigmf-data` (or
//! the `core:dataset` it names). An archive with more than one recording is
//! refused with the list of recordings.

use std::fs::File;
use std::io::{Read, Seek};
use std::path::{Path, PathBuf};

use super::sigmf::{self, SigmfMeta};
use super::CaptureError;

/// The recording inside an archive.
#[derive(Debug)]
pub(crate) struct ArchiveMember {
    /// Name of the metadata member, e.g. `crane/crane.sigmf-meta`.
    pub meta_name: String,
    /// The metadata.
    pub meta: SigmfMeta,
    /// Name of the data member.
    pub data_name: String,
    /// Byte offset of the data member's contents in the archive file.
    pub data_offset: u64,
    /// Length of the data member in bytes.
    pub data_len: u64,
}

struct Entry {
    name: PathBuf,
    offset: u64,
    len: u64,
    regular: bool,
}

/// An error of the tar reader as quoted in a message: it can hold raw bytes
/// of the archive's headers, so at most 60 characters, escaped.
fn short(e: &impl std::fmt::Display) -> String {
    crate::text::excerpt(&e.to_string(), 60)
}

/// Find the one recording in the archive `file` (at `path`, for messages).
pub(crate) fn locate(file: &mut File, path: &Path) -> Result<ArchiveMember, CaptureError> {
    let bad = |problem: String| CaptureError::Archive {
        path: path.to_path_buf(),
        problem,
    };
    file.rewind().map_err(|e| bad(e.to_string()))?;
    let mut entries = Vec::new();
    let mut metas = Vec::new();
    {
        let mut ar = tar::Archive::new(&mut *file);
        let iter = ar
            .entries_with_seek()
            .map_err(|e| bad(format!("not a tar archive: {}", short(&e))))?;
        for e in iter {
            let mut e = e.map_err(|e| bad(format!("not a readable tar archive: {}", short(&e))))?;
            let name = e
                .path()
                .map_err(|e| bad(format!("bad member name: {}", short(&e))))?
                .into_owned();
            let regular = e.header().entry_type().is_file();
            let len = e.size();
            let offset = e.raw_file_position();
            if regular && sigmf::has_extension(&name, "sigmf-meta") {
                if len > sigmf::MAX_SIDECAR_BYTES {
                    return Err(bad(format!(
                        "member {}: {len} bytes is too large for a metadata file",
                        name.display()
                    )));
                }
                let mut text = Vec::with_capacity(len as usize);
                (&mut e)
                    .take(len)
                    .read_to_end(&mut text)
                    .map_err(|err| bad(format!("member {}: {err}", name.display())))?;
                metas.push((name.clone(), text));
            }
            entries.push(Entry {
                name,
                offset,
                len,
                regular,
            });
        }
    }
    let (meta_name, text) = match metas.len() {
        1 => metas.remove(0),
        0 => {
            return Err(bad(
                "holds no .sigmf-meta member (not a SigMF archive)".into()
            ))
        }
        _ => {
            let names: Vec<String> = metas.iter().map(|(n, _)| n.display().to_string()).collect();
            return Err(bad(format!(
                "holds {} recordings ({}); only single-recording archives are read — extract the one to analyse",
                names.len(),
                names.join(", ")
            )));
        }
    };
    let meta_label = PathBuf::from(format!("{}:{}", path.display(), meta_name.display()));
    let meta = sigmf::parse_sidecar_bytes(&text, &meta_label)?;
    let data_name = match &meta.dataset {
        Some(d) => meta_name.with_file_name(d),
        None => meta_name.with_extension("sigmf-data"),
    };
    let data = entries
        .iter()
        .find(|e| e.name == data_name)
        .ok_or_else(|| {
            bad(format!(
                "has no member {} for {}",
                data_name.display(),
                meta_name.display()
            ))
        })?;
    if !data.regular {
        return Err(bad(format!(
            "member {} is not a regular file",
            data.name.display()
        )));
    }
    Ok(ArchiveMember {
        meta_name: meta_name.display().to_string(),
        meta,
        data_name: data_name.display().to_string(),
        data_offset: data.offset,
        data_len: data.len,
    })
}
