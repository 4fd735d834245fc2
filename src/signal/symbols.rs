//! Explicit symbol lists: from `[re, im]` pairs or from a text file.
//!
//! Takes in: text with one `re im` pair per line (whitespace or one comma
//! between the two numbers), `#` starting a comment that runs to the end of the
//! line, blank lines ignored; or a slice of `[re, im]` pairs. Gives out: symbols
//! ([`Cf32`]) exactly as written — no normalisation, no slicing.
//!
//! Errors ([`SignalError::SymbolsParse`]) name the 1-based line number, what was
//! expected and what was found. Non-finite values (NaN, ±inf) are rejected. A
//! text with no symbols at all is an error ([`SignalError::NoSymbols`]).

use std::path::Path;

use super::SignalError;
use crate::Cf32;

/// Longest excerpt of a symbols-file line quoted in an error, characters: the
/// file may be any file the profile names, so at most this much of one line is
/// shown, escaped (issue 16).
pub const EXCERPT_CHARS: usize = 24;

/// Parses a symbol list (see the module doc for the format).
pub fn parse_symbols(text: &str) -> Result<Vec<Cf32>, SignalError> {
    parse_symbols_capped(text, usize::MAX)
}

/// [`parse_symbols`], refusing a list of more than `max_symbols` symbols as
/// soon as the count passes the cap (nothing beyond it is allocated).
pub fn parse_symbols_capped(text: &str, max_symbols: usize) -> Result<Vec<Cf32>, SignalError> {
    let mut out = Vec::new();
    for (idx, raw_line) in text.lines().enumerate() {
        let line_no = idx + 1;
        let content = raw_line.split('#').next().unwrap_or("").trim();
        if content.is_empty() {
            continue;
        }
        let fields: Vec<&str> = content
            .split(|c: char| c.is_whitespace() || c == ',')
            .filter(|f| !f.is_empty())
            .collect();
        if fields.len() != 2 || content.matches(',').count() > 1 {
            return Err(SignalError::SymbolsParse {
                line: line_no,
                expected: "two numbers `re im` (real and imaginary part)",
                found: crate::text::excerpt(content, EXCERPT_CHARS),
            });
        }
        if out.len() >= max_symbols {
            return Err(SignalError::SymbolsParse {
                line: line_no,
                expected: "no more symbols than the cap for this use",
                found: format!("more than {max_symbols} symbols"),
            });
        }
        let mut parts = [0f32; 2];
        for (p, (f, what)) in parts
            .iter_mut()
            .zip(fields.iter().zip(["real part", "imaginary part"]))
        {
            *p = match f.parse::<f32>() {
                Ok(v) if v.is_finite() => v,
                _ => {
                    return Err(SignalError::SymbolsParse {
                        line: line_no,
                        expected: if what == "real part" {
                            "a finite number for the real part"
                        } else {
                            "a finite number for the imaginary part"
                        },
                        found: crate::text::excerpt(f, EXCERPT_CHARS),
                    })
                }
            };
        }
        out.push(Cf32::new(parts[0], parts[1]));
    }
    if out.is_empty() {
        return Err(SignalError::NoSymbols);
    }
    Ok(out)
}

/// Reads and parses a symbols file (UTF-8 text, format in the module doc).
/// At most `max_symbols` symbols are accepted.
pub fn read_symbols_file(path: &Path, max_symbols: usize) -> Result<Vec<Cf32>, SignalError> {
    let text = crate::limits::read_small_text(path, crate::limits::MAX_SYMBOLS_FILE_BYTES)
        .map_err(|e| SignalError::Io {
            path: path.to_path_buf(),
            message: e.to_string(),
        })?;
    parse_symbols_capped(&text, max_symbols).map_err(|e| match e {
        SignalError::SymbolsParse {
            line,
            expected,
            found,
        } => SignalError::SymbolsFile {
            path: path.to_path_buf(),
            line,
            expected,
            found,
        },
        other => other,
    })
}

/// Symbols from explicit `[re, im]` pairs; rejects non-finite values (the error's
/// `line` is the 1-based index of the pair).
pub fn symbols_from_pairs(pairs: &[[f64; 2]]) -> Result<Vec<Cf32>, SignalError> {
    if pairs.is_empty() {
        return Err(SignalError::NoSymbols);
    }
    pairs
        .iter()
        .enumerate()
        .map(|(i, &[re, im])| {
            let (r, q) = (re as f32, im as f32);
            if r.is_finite() && q.is_finite() {
                Ok(Cf32::new(r, q))
            } else {
                Err(SignalError::SymbolsParse {
                    line: i + 1,
                    expected: "finite real and imaginary parts within f32 range",
                    found: format!("[{re}, {im}]"),
                })
            }
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn parses_pairs_comments_and_blank_lines() {
        let text = "# crane telemetry training block\n\n 1 0\n-0.5\t0.25 # inline\n1e-1, -2E0\n   \n0 -1\r\n";
        let s = parse_symbols(text).unwrap();
        assert_eq!(
            s,
            vec![
                Cf32::new(1.0, 0.0),
                Cf32::new(-0.5, 0.25),
                Cf32::new(0.1, -2.0),
                Cf32::new(0.0, -1.0)
            ]
        );
    }

    #[test]
    fn errors_name_the_line_and_what_was_expected() {
        for (text, line, found) in [
            ("1 0\n2\n", 2, "2"),
            ("1 0\n\n# c\n1 2 3\n", 4, "1 2 3"),
            ("1 x\n", 1, "x"),
            ("nan 0\n", 1, "nan"),
            ("0 inf\n", 1, "inf"),
            ("1 0\n1e40 0\n", 2, "1e40"),
            ("1,,2\n", 1, "1,,2"),
        ] {
            match parse_symbols(text) {
                Err(SignalError::SymbolsParse {
                    line: l,
                    found: f,
                    expected,
                }) => {
                    assert_eq!((l, f.as_str()), (line, found), "{text:?}");
                    assert!(!expected.is_empty());
                }
                other => panic!("{text:?}: expected a parse error, got {other:?}"),
            }
        }
        let e = parse_symbols("1 0\n0 y\n").unwrap_err();
        assert!(e.to_string().contains("line 2"), "{e}");
        assert!(e.to_string().contains("imaginary"), "{e}");
        assert_eq!(parse_symbols("# nothing\n\n"), Err(SignalError::NoSymbols));
    }

    #[test]
    fn file_errors_carry_the_path() {
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("train.txt");
        std::fs::write(&p, "1 1\n-1 oops\n").unwrap();
        match read_symbols_file(&p, usize::MAX) {
            Err(SignalError::SymbolsFile { path, line, .. }) => {
                assert_eq!((path, line), (p.clone(), 2));
            }
            other => panic!("{other:?}"),
        }
        std::fs::write(&p, "1 1\n-1 -1\n").unwrap();
        assert_eq!(read_symbols_file(&p, usize::MAX).unwrap().len(), 2);
        assert!(matches!(
            read_symbols_file(&dir.path().join("missing.txt"), usize::MAX),
            Err(SignalError::Io { .. })
        ));
    }

    #[test]
    fn pairs_are_checked_for_finite_values() {
        assert_eq!(
            symbols_from_pairs(&[[1.0, -1.0], [0.5, 0.0]]).unwrap(),
            vec![Cf32::new(1.0, -1.0), Cf32::new(0.5, 0.0)]
        );
        assert!(matches!(
            symbols_from_pairs(&[[1.0, 0.0], [f64::NAN, 0.0]]),
            Err(SignalError::SymbolsParse { line: 2, .. })
        ));
        assert_eq!(symbols_from_pairs(&[]), Err(SignalError::NoSymbols));
    }
}
