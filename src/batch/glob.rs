//! The glob language of `batch --glob`, matched by the `globset` crate.
//!
//! Takes in: a pattern string and a relative path with `/` separators. Gives
//! out: whether the path matches. The language (common shell/gitignore practice):
//!
//! * `*` matches any run of characters except `/` (possibly empty);
//! * `?` matches exactly one character except `/`;
//! * `[abc]`, `[a-z]` match one character of the class, `[!abc]` (or `[^abc]`)
//!   one not in it; a class never matches `/`;
//! * `{a,b,c}` matches any of the comma-separated alternatives (each may hold
//!   wildcards and nested alternatives);
//! * `**` as a whole path segment matches any number of directories: `**/x`
//!   matches `x`, `a/x` and `a/b/x`; a trailing `/**` matches everything below;
//!   `**` elsewhere in a segment acts like `*`;
//! * `\` escapes the next character (`\*` is a literal star);
//! * every other character matches itself (case-sensitive);
//! * a pattern without `/` is matched against the file name alone, so
//!   `--glob '*.cf32'` finds `.cf32` files at any depth.
//!
//! A malformed pattern (an unclosed `[` or `{`, a reversed range)
//! is refused with the reason, never read as literal text. Matching is
//! compiled to a finite automaton by `globset` (the matcher of a well-kept
//! file-search tool), so it is linear in the path whatever the pattern.

use std::fmt;

/// A `--glob` pattern was malformed.
#[derive(Debug, Clone, PartialEq, Eq, thiserror::Error)]
#[non_exhaustive]
pub enum GlobError {
    /// The pattern is empty.
    #[error("the glob pattern is empty; give e.g. '*.cf32' or 'site-a/**/*.wav'")]
    Empty,
    /// The pattern does not parse.
    #[error("the glob pattern '{pattern}' is malformed: {reason}")]
    Malformed {
        /// The pattern as given (control characters escaped).
        pattern: String,
        /// Why, in the matcher's words.
        reason: String,
    },
}

/// A compiled glob pattern; see the module documentation.
#[derive(Debug, Clone)]
pub struct Glob {
    text: String,
    matcher: globset::GlobMatcher,
    name_only: bool,
}

impl PartialEq for Glob {
    fn eq(&self, other: &Glob) -> bool {
        self.text == other.text
    }
}

impl Eq for Glob {}

impl Glob {
    /// Compile a pattern.
    pub fn new(pattern: &str) -> Result<Glob, GlobError> {
        if pattern.is_empty() {
            return Err(GlobError::Empty);
        }
        let glob = globset::GlobBuilder::new(pattern)
            .literal_separator(true)
            .backslash_escape(true)
            .empty_alternates(true)
            .build()
            .map_err(|e| GlobError::Malformed {
                pattern: crate::text::escape_controls(pattern),
                reason: e.kind().to_string(),
            })?;
        Ok(Glob {
            text: pattern.to_string(),
            matcher: glob.compile_matcher(),
            name_only: !pattern.contains('/'),
        })
    }

    /// The pattern as given.
    pub fn as_str(&self) -> &str {
        &self.text
    }

    /// Whether `rel_path` (relative, `/`-separated) matches.
    pub fn is_match(&self, rel_path: &str) -> bool {
        let subject = if self.name_only {
            rel_path.rsplit('/').next().unwrap_or(rel_path)
        } else {
            rel_path
        };
        self.matcher.is_match(subject)
    }
}

impl fmt::Display for Glob {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(&self.text)
    }
}

impl std::str::FromStr for Glob {
    type Err = GlobError;
    fn from_str(s: &str) -> Result<Glob, GlobError> {
        Glob::new(s)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[derive(Debug, Clone, Copy, PartialEq, Eq)]
    enum Token {
        Char(char),
        /// `?`
        One,
        /// `*`
        Star,
        /// `**/`: empty, or any text that ends with `/`.
        Dirs,
        /// trailing `/**` after the slash, or a pattern that is only `**`: anything.
        Rest,
    }

    /// The wildcard subset (`*`, `?`, `**`) as tokens, read by hand.
    fn tokens(pattern: &str) -> Vec<Token> {
        let chars: Vec<char> = pattern.chars().collect();
        let mut tokens = Vec::with_capacity(chars.len());
        let mut i = 0;
        while i < chars.len() {
            let c = chars[i];
            if c == '*' && chars.get(i + 1) == Some(&'*') {
                let at_segment_start = i == 0 || chars[i - 1] == '/';
                let next = chars.get(i + 2);
                if at_segment_start && next == Some(&'/') {
                    tokens.push(Token::Dirs);
                    i += 3;
                    continue;
                }
                if at_segment_start && next.is_none() {
                    tokens.push(Token::Rest);
                    i += 2;
                    continue;
                }
                tokens.push(Token::Star);
                i += 2;
                continue;
            }
            tokens.push(match c {
                '*' => Token::Star,
                '?' => Token::One,
                other => Token::Char(other),
            });
            i += 1;
        }
        tokens
    }

    /// A slow, obviously correct backtracking matcher over the same tokens.
    fn naive(tokens: &[Token], text: &[char]) -> bool {
        match tokens.split_first() {
            None => text.is_empty(),
            Some((&t, rest)) => match t {
                Token::Char(c) => text.first() == Some(&c) && naive(rest, &text[1..]),
                Token::One => {
                    matches!(text.first(), Some(&c) if c != '/') && naive(rest, &text[1..])
                }
                Token::Star => (0..=text.len())
                    .take_while(|&k| k == 0 || text[k - 1] != '/')
                    .any(|k| naive(rest, &text[k..])),
                Token::Rest => (0..=text.len()).any(|k| naive(rest, &text[k..])),
                Token::Dirs => (0..=text.len())
                    .filter(|&k| k == 0 || text[k - 1] == '/')
                    .any(|k| naive(rest, &text[k..])),
            },
        }
    }

    #[test]
    fn star_question_and_double_star_follow_common_shell_practice() {
        // Source: common practice (POSIX shell `*`/`?` within a path segment;
        // gitignore-style `**` across directories), cases written by hand.
        let cases: &[(&str, &str, bool)] = &[
            ("*.cf32", "a.cf32", true),
            ("*.cf32", "site/a.cf32", true), // no '/' in pattern: file name only
            ("*.cf32", "a.cf32.report.json", false),
            ("site/*.cf32", "site/a.cf32", true),
            ("site/*.cf32", "site/day1/a.cf32", false),
            ("site/**/*.cf32", "site/a.cf32", true),
            ("site/**/*.cf32", "site/day1/a.cf32", true),
            ("site/**/*.cf32", "site/day1/x/a.cf32", true),
            ("site/**/*.cf32", "other/a.cf32", false),
            ("**/a.wav", "a.wav", true),
            ("**/a.wav", "x/y/a.wav", true),
            ("**/a.wav", "x/ya.wav", false),
            ("site/**", "site/a/b.cu8", true),
            ("site/**", "sites/a.cu8", false),
            ("cap?.ci16", "cap1.ci16", true),
            ("cap?.ci16", "cap12.ci16", false),
            ("d?r/x", "d/r/x", false),
            ("**", "anything/at/all", true),
            ("a**b", "axxb", true),
            ("a**b", "ax/xb", false),
            ("exact/name.cu8", "exact/name.cu8", true),
            ("exact/name.cu8", "exact/name.cu8x", false),
        ];
        for &(p, path, want) in cases {
            assert_eq!(Glob::new(p).unwrap().is_match(path), want, "{p} vs {path}");
        }
    }

    #[test]
    fn the_table_matcher_agrees_with_a_backtracking_matcher_on_every_small_case() {
        let patterns = [
            "*", "?", "**", "a*", "*a", "a?b", "**/a", "a/**", "a/**/b", "*/*", "a*b*c", "**/*b",
            "?/**/?", "a**", "*.*",
        ];
        let alphabet = ['a', 'b', '/', '.'];
        // Every string up to length 5 over a 4-letter alphabet (1365 strings).
        let mut texts: Vec<String> = vec![String::new()];
        let mut frontier = vec![String::new()];
        for _ in 0..5 {
            let mut next = Vec::new();
            for s in &frontier {
                for c in alphabet {
                    next.push(format!("{s}{c}"));
                }
            }
            texts.extend(next.iter().cloned());
            frontier = next;
        }
        for p in patterns {
            let g = Glob::new(p).unwrap();
            for t in &texts {
                let subject = if g.name_only {
                    t.rsplit('/').next().unwrap_or(t)
                } else {
                    t.as_str()
                };
                let chars: Vec<char> = subject.chars().collect();
                assert_eq!(g.is_match(t), naive(&tokens(p), &chars), "{p} vs {t:?}");
            }
        }
    }

    #[test]
    fn classes_and_alternation_follow_common_shell_practice() {
        // Source: common practice (POSIX shell bracket expressions, `[!…]`
        // negation; bash/gitignore-style `{a,b}` alternation), cases by hand.
        let cases: &[(&str, &str, bool)] = &[
            ("cap-00[1-3].ci16", "cap-002.ci16", true),
            ("cap-00[1-3].ci16", "cap-004.ci16", false),
            ("cap-00[1-3].ci16", "site/cap-001.ci16", true),
            ("cap-[!0]*.ci16", "cap-7.ci16", true),
            ("cap-[!0]*.ci16", "cap-07.ci16", false),
            ("[ab].cu8", "a.cu8", true),
            ("[ab].cu8", "c.cu8", false),
            ("x[/]y", "x/y", false),
            ("*.{cf32,ci16}", "a.ci16", true),
            ("*.{cf32,ci16}", "a.cf32", true),
            ("*.{cf32,ci16}", "a.wav", false),
            ("site-{a,b}/**/*.wav", "site-b/day1/x.wav", true),
            ("site-{a,b}/**/*.wav", "site-c/day1/x.wav", false),
            ("{north,south}-*.cf32", "south-3.cf32", true),
            ("{a,{b,c}}.cu8", "c.cu8", true),
            ("{a,{b,c}}.cu8", "d.cu8", false),
            ("\\*.cf32", "*.cf32", true),
            ("\\*.cf32", "a.cf32", false),
        ];
        for &(p, path, want) in cases {
            assert_eq!(Glob::new(p).unwrap().is_match(path), want, "{p} vs {path}");
        }
    }

    #[test]
    fn an_empty_or_malformed_pattern_is_refused_with_the_reason() {
        assert_eq!(Glob::new(""), Err(GlobError::Empty));
        for p in ["cap[1-3.ci16", "*.{cf32,ci16", "[z-a]"] {
            let e = Glob::new(p).unwrap_err();
            assert!(
                matches!(&e, GlobError::Malformed { pattern, .. } if pattern == p),
                "{p}: {e:?}"
            );
            assert!(e.to_string().contains("malformed"), "{e}");
        }
    }
}
