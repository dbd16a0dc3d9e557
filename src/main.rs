//! The `fluxloom` command: parse the command line, run the command, and turn the
//! outcome into an exit status (0 success, 1 error, 2 usage error from clap).

use std::process::ExitCode;

use clap::Parser;

fn main() -> ExitCode {
    // A reader's panic on a damaged file becomes a one-line error; only other
    // panics are reported by the default hook.
    let default_hook = std::panic::take_hook();
    std::panic::set_hook(Box::new(move |info| {
        if !fluxloom::catalog::panics_are_caught() {
            default_hook(info);
        }
    }));
    let cli = fluxloom::cli::Cli::parse();
    match fluxloom::cli::run(cli) {
        Ok(()) => ExitCode::SUCCESS,
        Err(fluxloom::Error::Io { source, .. })
            if source.kind() == std::io::ErrorKind::BrokenPipe =>
        {
            ExitCode::SUCCESS
        }
        Err(err) => {
            eprintln!("fluxloom: error: {err}");
            ExitCode::from(1)
        }
    }
}
