//! The `fickfit` command-line tool: a thin layer over the library. It parses arguments, runs
//! one command, prints any error once with its cause chain, and maps the outcome to the
//! documented exit codes (0 success, 1 fit problem, 2 bad input or usage).

mod cli;

use clap::Parser;
use cli::args::{Cli, Command};
use cli::Outcome;

fn main() {
    let parsed = match Cli::try_parse() {
        Ok(c) => c,
        Err(e) => {
            // Help and version go to stdout with code 0; usage errors exit with 2.
            let code = if e.use_stderr() {
                cli::EXIT_BAD_INPUT
            } else {
                0
            };
            let _ = e.print();
            std::process::exit(code);
        }
    };
    let result = match &parsed.command {
        Command::Fit(a) => cli::commands::fit(a),
        Command::Check(a) => cli::commands::check(a),
        Command::Simulate(a) => cli::commands::simulate(a),
        Command::Arrhenius(a) => cli::commands::arrhenius(a),
        Command::Batch(a) => cli::commands::batch(a),
        Command::Generate(a) => {
            cli::generate(a, &mut std::io::stdout().lock()).map(|_| Outcome::Success)
        }
    };
    let code = match result {
        Ok(Outcome::Success) => 0,
        Ok(Outcome::FitProblem) => 1,
        Err(e) if cli::is_broken_pipe(&e) => 0,
        Err(e) => {
            cli::print_error(&e);
            cli::EXIT_BAD_INPUT
        }
    };
    std::process::exit(code);
}
