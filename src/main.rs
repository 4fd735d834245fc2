//! The `iqaudit` binary: parse the command line, call the library, map the
//! outcome to an exit code. Nothing else lives here.
use clap::Parser;

mod cli;

fn main() -> std::process::ExitCode {
    let args = cli::Cli::parse();
    cli::exit_code(cli::run(args))
}
