//! The `xsflow` binary: parse the command line, run the verb (`xsflow::commands`, which
//! prints what it says), map the outcome to an exit code: 0 done, 1 a run or fit failed,
//! 2 bad command line or config.

use std::process::ExitCode;

use clap::Parser;
use xsflow::cli::Cli;
use xsflow::commands::{init_logs, run, Outcome};

fn main() -> ExitCode {
    let cli = match Cli::try_parse() {
        Ok(cli) => cli,
        Err(e) => {
            // Help and version go to stdout and are no error.
            let code = if e.use_stderr() { 2 } else { 0 };
            let _ = e.print();
            return ExitCode::from(code);
        }
    };
    init_logs(cli.verbose, cli.quiet);
    ExitCode::from(match run(cli.command) {
        Outcome::Done => 0,
        Outcome::Failed => 1,
        Outcome::BadInput => 2,
    })
}
