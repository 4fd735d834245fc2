//! The small glob language of `batch --glob`.
//!
//! Takes in: a pattern string and a relative path with `/` separators. Gives
//! out: whether the path matches. The language (common shell/gitignore practice):
//!
//! * `*` matches any run of characters except `/` (possibly empty);
//! * `?` matches exactly one character except `/`;
//! * `**` as a whole path segment matches any number of directories: `**/x`
//!   matches `x`, `a/x` and `a/b/x`; a trailing `/**` matches everything below;
//!   `**` elsewhere in a segment acts like `*`;
//! * every other character matches itself (case-sensitive);
//! * a pattern without `/` is matched against the file name alone, so
//!   `--glob '*.cf32'` finds `.cf32` files at any depth.
//!
//! Matching is a dynamic programme over (pattern token, path position), so it is
//! O(pattern × path) whatever the pattern; no backtracking blow-up.

use std::fmt;

/// A `--glob` pattern was malformed.
#[derive(Debug, Clone, PartialEq, Eq, thiserror::Error)]
#[non_exhaustive]
pub enum GlobError {
    /// The pattern is empty.
    #[error("the glob pattern is empty; give e.g. '*.cf32' or 'site-a/**/*.wav'")]
    Empty,
}

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

/// A compiled glob pattern; see the module documentation.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Glob {
    text: String,
    tokens: Vec<Token>,
    name_only: bool,
}

impl Glob {
    /// Compile a pattern.
    pub fn new(pattern: &str) -> Result<Glob, GlobError> {
        if pattern.is_empty() {
            return Err(GlobError::Empty);
        }
        let name_only = !pattern.contains('/');
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
        Ok(Glob {
            text: pattern.to_string(),
            tokens,
            name_only,
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
        let text: Vec<char> = subject.chars().collect();
        let n = text.len();
        // next[j]: tokens[i+1..] match text[j..]; cur[j]: tokens[i..] match text[j..].
        let mut next = vec![false; n + 1];
        next[n] = true;
        let mut cur = vec![false; n + 1];
        for &tok in self.tokens.iter().rev() {
            match tok {
                Token::Char(c) => {
                    cur[n] = false;
                    for j in 0..n {
                        cur[j] = text[j] == c && next[j + 1];
                    }
                }
                Token::One => {
                    cur[n] = false;
                    for j in 0..n {
                        cur[j] = text[j] != '/' && next[j + 1];
                    }
                }
                Token::Star => {
                    cur[n] = next[n];
                    for j in (0..n).rev() {
                        cur[j] = next[j] || (text[j] != '/' && cur[j + 1]);
                    }
                }
                Token::Rest => {
                    cur[n] = next[n];
                    for j in (0..n).rev() {
                        cur[j] = next[j] || cur[j + 1];
                    }
                }
                Token::Dirs => {
                    // ends_here[j]: some k > j with text[k-1] == '/' and next[k].
                    let mut later = false;
                    cur[n] = next[n];
                    for j in (0..n).rev() {
                        later = (text[j] == '/' && next[j + 1]) || later;
                        cur[j] = next[j] || later;
                    }
                }
            }
            std::mem::swap(&mut cur, &mut next);
        }
        next[0]
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
                assert_eq!(g.is_match(t), naive(&g.tokens, &chars), "{p} vs {t:?}");
            }
        }
    }

    #[test]
    fn an_empty_pattern_is_refused() {
        assert_eq!(Glob::new(""), Err(GlobError::Empty));
    }
}
