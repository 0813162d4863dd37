//! The `beadline` command: parse the arguments, run, exit with a documented status.

mod cli;

fn main() -> std::process::ExitCode {
    cli::run()
}
