//! The `qheat` command: a thin layer over the library.

fn main() -> std::process::ExitCode {
    qheat::cli::run()
}
