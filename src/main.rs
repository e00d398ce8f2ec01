//! The `redoubt` binary: parse the command line, call [`redoubt::run`] with a locked
//! standard output and the (unlocked) standard error, and map the outcome to an exit
//! status (the README's table):
//!
//! | status | meaning |
//! |---|---|
//! | 0 | done, no gate failed |
//! | 1 | a gate failed, or `compare` found a change that does not pass |
//! | 2 | bad input or usage (a file that cannot be read or written included; also clap's refusals) |
//! | 3 | an internal fault: the LP backend failed, or a state the program relies on did not hold |
//! | 130 | interrupted by SIGINT, SIGTERM or SIGHUP (128 + SIGINT) |
//! | 141 | standard output closed early (128 + SIGPIPE) |

use std::io::{self, BufWriter, Write};
use std::process::ExitCode;

use clap::Parser;
use redoubt::error::Error;

fn main() -> ExitCode {
    // A write past `ulimit -f` must fail with an error (and leave the old output file in
    // place), not kill the process with SIGXFSZ.
    #[cfg(unix)]
    // SAFETY: setting a signal's disposition to "ignore" at start-up, before any thread
    // exists, has no memory-safety preconditions.
    unsafe {
        libc::signal(libc::SIGXFSZ, libc::SIG_IGN);
    }
    let cli = match redoubt::cli::Cli::try_parse() {
        Ok(c) => c,
        Err(e) => {
            let _ = e.print();
            return ExitCode::from(if e.use_stderr() { 2 } else { 0 });
        }
    };
    let stdout = io::stdout();
    let mut out = BufWriter::new(stdout.lock());
    // Standard error stays unlocked: the progress bar's timer thread writes to it too, and a
    // lock held for the whole run would leave that thread (and so the bar's final clear on
    // this thread) waiting forever on a terminal. Each write takes the lock briefly.
    let mut err = io::stderr();
    let result = redoubt::run(cli, &mut out, &mut err)
        .and_then(|outcome| redoubt::stdout_result(out.flush()).map(|()| outcome));
    match result {
        Ok(outcome) => ExitCode::from(outcome.exit_code()),
        Err(Error::BrokenPipe) => {
            // The reader has what it wanted; drop the rest of the buffer unwritten.
            std::mem::forget(out);
            ExitCode::from(Error::BrokenPipe.exit_code() as u8)
        }
        Err(e) => {
            let _ = writeln!(err, "redoubt: {e}");
            ExitCode::from(e.exit_code() as u8)
        }
    }
}
