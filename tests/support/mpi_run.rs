//! Running the binary alone and under `mpirun` for the MPI tests
//! (tests/mpi_split.rs, tests/mpi_energy.rs): every command is killed, and
//! the test failed, if it outlives [`HANG`], so a hang of the ranks fails
//! instead of stalling CI.
#![allow(dead_code)]

use std::path::{Path, PathBuf};
use std::process::{Command, Output, Stdio};
use std::time::{Duration, Instant};

/// Longest any one command may take before the test calls it a hang.
pub const HANG: Duration = Duration::from_secs(120);

pub fn write(dir: &Path, name: &str, text: &str) -> PathBuf {
    let p = dir.join(name);
    std::fs::write(&p, text).unwrap();
    p
}

/// Run a command to its end, killing it (and failing) after [`HANG`].
pub fn finish(mut cmd: Command) -> Output {
    cmd.stdout(Stdio::piped()).stderr(Stdio::piped());
    cmd.env_remove("RUST_BACKTRACE");
    let mut child = cmd.spawn().unwrap_or_else(|e| {
        panic!(
            "could not start {:?}: {e}; hint: install Open MPI (Debian: apt-get install \
             openmpi-bin libopenmpi-dev) so that `mpirun` is on PATH",
            cmd.get_program()
        )
    });
    let start = Instant::now();
    while child.try_wait().unwrap().is_none() {
        if start.elapsed() > HANG {
            let _ = child.kill();
            panic!("{cmd:?} still ran after {HANG:?}: the ranks hang");
        }
        std::thread::sleep(Duration::from_millis(50));
    }
    child.wait_with_output().unwrap()
}

/// qheat alone (no launcher) with `threads` threads.
pub fn alone(threads: usize, args: &[&str]) -> Output {
    let mut c = Command::new(env!("CARGO_BIN_EXE_qheat"));
    c.arg("--threads").arg(threads.to_string()).args(args);
    finish(c)
}

/// qheat on `ranks` ranks of one thread each.
pub fn ranks(ranks: usize, args: &[&str], env: &[(&str, &str)]) -> Output {
    let mut c = Command::new("mpirun");
    c.args(["--oversubscribe", "-n", &ranks.to_string()])
        // The test machines and CI run as root; Open MPI refuses root
        // unless told both of these.
        .env("OMPI_ALLOW_RUN_AS_ROOT", "1")
        .env("OMPI_ALLOW_RUN_AS_ROOT_CONFIRM", "1")
        .arg(env!("CARGO_BIN_EXE_qheat"))
        .arg("--threads")
        .arg("1")
        .args(args);
    for (k, v) in env {
        c.env(k, v);
    }
    finish(c)
}

pub fn stderr(o: &Output) -> String {
    String::from_utf8_lossy(&o.stderr).into_owned()
}
