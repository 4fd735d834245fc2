//! Terminal conventions shared by every command: when to colour.

use std::io::IsTerminal;

/// `--color`: when the terminal output is coloured.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, clap::ValueEnum)]
pub enum ColorWhen {
    /// Colour when stdout is a terminal, unless NO_COLOR says otherwise
    /// (CLICOLOR_FORCE forces it, CLICOLOR=0 turns it off).
    #[default]
    Auto,
    /// Always colour.
    Always,
    /// Never colour.
    Never,
}

/// Whether to colour stdout, given the choice and the environment:
/// `--color always|never` win; under `auto`, a non-empty `NO_COLOR` turns
/// colour off (no-color.org: "when present and not an empty string"), then a
/// `CLICOLOR_FORCE` other than empty or `0` turns it on whatever the output
/// is, then `CLICOLOR=0` turns it off, and otherwise a terminal whose `TERM`
/// is not `dumb` gets colour (bixense.com/clicolors). The precedence is that
/// of clap's own terminal-styling crates (anstream).
pub fn colour_stdout(when: ColorWhen) -> bool {
    decide(
        when,
        anstyle_query::no_color(),
        std::env::var_os("CLICOLOR_FORCE").is_some_and(|v| !v.is_empty() && v != "0"),
        anstyle_query::clicolor() == Some(false),
        std::io::stdout().is_terminal() && anstyle_query::term_supports_color(),
    )
}

fn decide(when: ColorWhen, no_color: bool, force: bool, clicolor_off: bool, tty: bool) -> bool {
    match when {
        ColorWhen::Always => true,
        ColorWhen::Never => false,
        ColorWhen::Auto => !no_color && (force || (!clicolor_off && tty)),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_colour_decision_follows_no_color_and_clicolor() {
        use ColorWhen::*;
        // (when, NO_COLOR non-empty, CLICOLOR_FORCE on, CLICOLOR=0, terminal) → colour.
        // Sources: no-color.org (NO_COLOR), bixense.com/clicolors (CLICOLOR,
        // CLICOLOR_FORCE); NO_COLOR before CLICOLOR_FORCE as anstream orders them.
        let cases = [
            (Auto, false, false, false, true, true),
            (Auto, false, false, false, false, false),
            (Auto, true, false, false, true, false),
            (Auto, false, true, false, false, true),
            (Auto, true, true, false, false, false),
            (Auto, false, false, true, true, false),
            (Auto, false, true, true, false, true),
            (Always, true, false, true, false, true),
            (Never, false, true, false, true, false),
        ];
        for (when, nc, force, off, tty, want) in cases {
            assert_eq!(
                decide(when, nc, force, off, tty),
                want,
                "{when:?} {nc} {force} {off} {tty}"
            );
        }
    }
}
