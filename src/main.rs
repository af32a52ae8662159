//! The `tauweave` binary: parses the command line, runs it, and turns the outcome into an
//! exit code. Exit codes are decided here and nowhere else: 0 ok, 1 the design fails a
//! requirement or check, 2 bad input or usage, 3 internal error.

use std::process::ExitCode;

use tauweave::cli::{self, Failure, Outcome};

fn main() -> ExitCode {
    match cli::run() {
        Ok(Outcome::Done) => ExitCode::SUCCESS,
        Ok(Outcome::Failing) => ExitCode::from(1),
        Err(Failure::Usage(message)) => {
            // clap prints its own help and version text and asks for exit 0 there.
            let code = if message.use_stderr() { 2 } else { 0 };
            let _ = message.print();
            ExitCode::from(code)
        }
        Err(Failure::Input(message)) => {
            eprint!("{message}");
            ExitCode::from(2)
        }
        Err(Failure::Internal(message)) => {
            eprintln!("internal error: {message}");
            eprintln!("this is a bug in tauweave; please report it with the design file");
            ExitCode::from(3)
        }
    }
}
