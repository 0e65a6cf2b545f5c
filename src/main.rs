//! The `qheat` command: a thin layer over the library (argument parsing,
//! progress, printing, exit codes).

mod cli;

fn main() -> std::process::ExitCode {
    cli::run()
}
