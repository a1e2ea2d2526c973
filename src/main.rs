//! The `fickfit` command-line tool: a thin layer over the library. It parses arguments, runs
//! one command, prints any error once with its cause chain, and maps the outcome to the
//! documented exit codes (0 success, 1 fit problem, 2 bad input or usage).

mod cli;

use clap::Parser;
use cli::args::{Cli, Command};
use cli::Outcome;

/// On Ctrl-C (SIGINT), SIGTERM or SIGHUP: remove the report files not yet committed (and a
/// report folder this run created), then exit with 128 + the signal number, as shells do.
/// Without this the default action would end the process at once and leave the hidden
/// staging folder behind until the next run.
#[cfg(unix)]
fn clean_up_when_interrupted() {
    use signal_hook::consts::{SIGHUP, SIGINT, SIGTERM};
    let Ok(mut signals) = signal_hook::iterator::Signals::new([SIGINT, SIGTERM, SIGHUP]) else {
        return; // No handler: the default action still stops the program.
    };
    let spawned = std::thread::Builder::new()
        .name("fickfit-signals".into())
        .spawn(move || {
            if let Some(signal) = signals.forever().next() {
                let _held = fickfit::report::folder::abandon_pending();
                eprintln!("fickfit: interrupted; files not yet complete were removed");
                std::process::exit(128 + signal);
            }
        });
    drop(spawned);
}

#[cfg(not(unix))]
fn clean_up_when_interrupted() {}

/// Give buffers of 1 MiB and more back to the system as soon as they are freed. glibc's
/// allocator otherwise raises its mmap threshold after the first such buffer is freed and
/// serves later ones from its heap, which keeps the freed space: a long record (the data
/// vectors, residuals and Jacobian columns are MBs each) then holds about 15 MB more resident
/// memory than it uses (measured at 10⁶ points, `docs/performance.md`). Small fits allocate
/// nothing this large and are unaffected.
#[cfg(all(target_os = "linux", target_env = "gnu"))]
fn give_back_large_buffers() {
    // SAFETY: mallopt only sets an allocator parameter; it is called before any thread is
    // started. A refusal (return 0) leaves the default, which is only less frugal.
    unsafe {
        libc::mallopt(libc::M_MMAP_THRESHOLD, 1 << 20);
    }
}

#[cfg(not(all(target_os = "linux", target_env = "gnu")))]
fn give_back_large_buffers() {}

fn main() {
    give_back_large_buffers();
    clean_up_when_interrupted();
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
