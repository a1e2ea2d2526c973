//! The binary's layer: arguments, running a command, printing errors once, exit codes.
//! Nothing here computes; it calls the library.

pub mod args;
pub mod commands;
pub mod progress;

use std::io::{self, Write};

/// How a command ended, mapped to the documented exit codes.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Outcome {
    /// Exit code 0.
    Success,
    /// Exit code 1: the fit ran but did not converge, or failed a check the user enforced.
    FitProblem,
}

/// Exit code for bad input or usage.
pub const EXIT_BAD_INPUT: i32 = 2;

/// True when an error chain ends in a broken pipe (the reader went away: not an error).
pub fn is_broken_pipe(err: &anyhow::Error) -> bool {
    err.chain().any(|c| {
        c.downcast_ref::<io::Error>()
            .is_some_and(|e| e.kind() == io::ErrorKind::BrokenPipe)
    })
}

/// Print an error once, with its cause chain, as `fickfit: ...`.
pub fn print_error(err: &anyhow::Error) {
    let mut stderr = io::stderr().lock();
    let _ = write!(stderr, "fickfit: {err}");
    for cause in err.chain().skip(1) {
        let _ = write!(stderr, ": {cause}");
    }
    let _ = writeln!(stderr);
}

/// Write the man page or completions to `out`.
pub fn generate(args: &args::GenerateArgs, out: &mut dyn Write) -> anyhow::Result<()> {
    use clap::CommandFactory;
    let mut cmd = args::Cli::command();
    match args.what {
        args::Generated::Man => {
            clap_mangen::Man::new(cmd).render(out)?;
        }
        args::Generated::Completions => {
            let shell = args.shell.ok_or_else(|| {
                anyhow::anyhow!("name a shell: bash, zsh, fish, elvish or powershell")
            })?;
            clap_complete::generate(shell, &mut cmd, "fickfit", out);
        }
    }
    Ok(())
}
