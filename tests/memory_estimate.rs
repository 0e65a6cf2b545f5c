//! The estimate before a run: `qheat check` shows peak memory and a time
//! guess, and `qheat solve` refuses (exit 1, nothing run) a case whose
//! memory estimate exceeds what is available, naming the settings that
//! would fit, unless told to run anyway. The memory available is set with
//! QHEAT_MEMORY_LIMIT_BYTES so that the test does not depend on the machine.

use qheat::case::Case;
use std::path::{Path, PathBuf};
use std::process::Command;

fn demo() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("cases-demo/peltier-barrier.toml")
}

fn qheat(limit: u64, args: &[&str], case: &Path, out: &Path) -> std::process::Output {
    Command::new(env!("CARGO_BIN_EXE_qheat"))
        .env("QHEAT_MEMORY_LIMIT_BYTES", limit.to_string())
        .args(["--threads", "1", "--quiet", "solve"])
        .arg(case)
        .args(args)
        .arg("-o")
        .arg(out)
        .output()
        .unwrap()
}

#[test]
fn solve_refuses_beyond_the_memory_and_names_what_would_fit() {
    let resolved = Case::load(&demo()).unwrap().resolve().unwrap();
    let need = resolved.memory_estimate_bytes();
    let alternatives = resolved.memory_alternatives();
    let (_, linear) = alternatives
        .iter()
        .find(|(k, _)| k.contains("\"linear\""))
        .expect("linear mixing offered")
        .clone();
    assert!(linear < need);
    // Room for linear mixing but not for the Anderson history (80 % of it).
    let limit = (linear + need) / 2 * 10 / 8;
    assert!(limit / 10 * 8 < need && limit / 10 * 8 >= linear);
    let tmp = tempfile::tempdir().unwrap();
    let out = tmp.path().join("refused");
    let o = qheat(limit, &[], &demo(), &out);
    let err = String::from_utf8_lossy(&o.stderr);
    assert_eq!(o.status.code(), Some(1), "{err}");
    assert!(!out.exists(), "nothing may be written");
    // Sizes as the message writes them: GiB from one GiB on, else MiB.
    let gib = |b: u64| {
        if b >= 1 << 30 {
            format!("{:.2} GiB", b as f64 / (1u64 << 30) as f64)
        } else {
            format!("{:.1} MiB", b as f64 / (1u64 << 20) as f64)
        }
    };
    assert!(err.contains(&gib(need)), "{err}");
    assert!(
        err.contains(&format!(
            "solver.mixing = \"linear\": about {} (fits)",
            gib(linear)
        )),
        "{err}"
    );
    assert!(err.contains("--ignore-memory-estimate"), "{err}");
    // Forced, it runs.
    let o = qheat(limit, &["--ignore-memory-estimate"], &demo(), &out);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    assert!(out.join("summary.json").exists());
}

#[test]
fn check_shows_memory_and_a_time_guess() {
    let o = Command::new(env!("CARGO_BIN_EXE_qheat"))
        .args(["--threads", "1", "check"])
        .arg(demo())
        .output()
        .unwrap();
    let text = String::from_utf8_lossy(&o.stdout);
    assert!(o.status.success());
    assert!(text.contains("memory      about"), "{text}");
    let time = text
        .lines()
        .find(|l| l.starts_with("time "))
        .expect("a time line");
    assert!(
        time.contains("a guess") && time.contains("iteration"),
        "{time}"
    );
    let o = Command::new(env!("CARGO_BIN_EXE_qheat"))
        .args(["--threads", "1", "--json", "check"])
        .arg(demo())
        .output()
        .unwrap();
    let v: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    let resolved = Case::load(&demo()).unwrap().resolve().unwrap();
    assert_eq!(v["time_estimate_s"], resolved.time_estimate_seconds(1));
    assert_eq!(v["iteration_guess"], resolved.iteration_guess());
}

/// With the coarse start on (auto on the 10⁴ × 10⁴ scale case), `qheat
/// check` names the coarse levels it assumes, counts each level of every
/// k-th energy at 1/k of a full-grid iteration, and says that the counts
/// are guesses; turned off, the same case is guessed as a plain loop.
/// (Consistency of the estimate's own parts, no outside reference.)
#[test]
fn check_counts_the_coarse_levels_at_their_cost() {
    let case = Path::new(env!("CARGO_MANIFEST_DIR")).join("benches/cases/scale-chain.toml");
    let run = |args: &[&str], case: &Path| {
        let o = Command::new(env!("CARGO_BIN_EXE_qheat"))
            .args(["--threads", "2"])
            .args(args)
            .arg("check")
            .arg(case)
            .output()
            .unwrap();
        assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
        String::from_utf8_lossy(&o.stdout).into_owned()
    };
    let text = run(&[], &case);
    let time = text
        .lines()
        .find(|l| l.starts_with("time "))
        .expect("a time line");
    let resolved = Case::load(&case).unwrap().resolve().unwrap();
    let levels = resolved.coarse_iteration_guess();
    // 10⁴ steps and 720 per phonon share 80: levels of every 80th, 16th
    // and 4th energy (the rule of src/scba/coarse.rs).
    assert_eq!(levels.iter().map(|l| l.0).collect::<Vec<_>>(), [80, 16, 4]);
    for (k, it) in &levels {
        assert!(
            time.contains(&format!("{it} on every {k}th energy")),
            "{time}"
        );
    }
    assert!(time.contains("guessed before the run"), "{time}");
    let fine = resolved.iteration_guess();
    assert!(
        time.contains(&format!("then {fine} on the full grid")),
        "{time}"
    );
    let equivalents = resolved.iteration_equivalents_guess();
    let want = fine as f64
        + levels
            .iter()
            .map(|&(k, it)| it as f64 / k as f64)
            .sum::<f64>();
    assert_eq!(equivalents, want);
    assert!(
        time.contains(&format!("{equivalents:.1} full-grid iteration(s)")),
        "{time}"
    );
    let v: serde_json::Value = serde_json::from_str(&run(&["--json"], &case)).unwrap();
    assert_eq!(v["iteration_equivalents_guess"], equivalents);
    assert_eq!(v["coarse_levels_guess"][0]["factor"], 80);
    assert_eq!(v["iteration_guess"], fine);
    let t = v["time_estimate_s"].as_f64().unwrap();
    let per = resolved.iteration_time_estimate_seconds(2);
    assert!((t - equivalents * per).abs() <= 1e-12 * t, "{t}");

    // Off: no levels, the plain guess, and fewer equivalents than a plain
    // loop would be guessed to need with the coarse start on.
    let dir = tempfile::tempdir().unwrap();
    let off = dir.path().join("off.toml");
    let text = std::fs::read_to_string(&case).unwrap();
    let off_text = text.replace("[solver]", "[solver]\ncoarse_start = \"off\"");
    assert_ne!(off_text, text);
    std::fs::write(&off, off_text).unwrap();
    let plain = Case::load(&off).unwrap().resolve().unwrap();
    assert!(plain.coarse_iteration_guess().is_empty());
    assert!(plain.iteration_guess() > fine);
    assert_eq!(
        plain.iteration_equivalents_guess(),
        plain.iteration_guess() as f64
    );
    assert!(equivalents < plain.iteration_equivalents_guess());
    let time = run(&[], &off);
    let time = time.lines().find(|l| l.starts_with("time ")).unwrap();
    assert!(time.contains("a count guessed before the run"), "{time}");
    assert!(!time.contains("coarse"), "{time}");
}

/// The time estimate is linear in the energies and the cells (the
/// recursion and the mixing are), grows as b³ for wide cells, and assumes
/// no more iterations than the limit.
#[test]
fn the_time_estimate_scales_with_the_work() {
    let resolved = Case::load(&demo()).unwrap().resolve().unwrap();
    let t = resolved.iteration_time_estimate_seconds(1);
    let mut twice = resolved.clone();
    twice.problem.grid.count *= 2;
    let t2 = twice.iteration_time_estimate_seconds(1);
    assert!((t2 / t - 2.0).abs() < 1e-12);
    // Two threads at 90 % efficiency each.
    assert!((resolved.iteration_time_estimate_seconds(2) * 2.0 - t).abs() < 1e-12 * t);
    let g = resolved.iteration_guess();
    assert!(g >= 1 && g <= resolved.scba.max_iterations);
    for (keys, bytes) in resolved.memory_alternatives() {
        assert!(bytes < resolved.memory_estimate_bytes(), "{keys}");
    }
}

/// `solver.anderson_history = "compact"` stores the Anderson history in
/// f32: the estimate drops by half the history's bytes, the refusal offers
/// it first (it changes the memory and not the fixed point), and a linear
/// mixer ignores it with a warning.
#[test]
fn the_compact_history_key_halves_the_history_and_is_offered_first() {
    let text = std::fs::read_to_string(demo()).unwrap();
    let base = demo().parent().unwrap().to_path_buf();
    let full = Case::parse(&text, "full", &base)
        .unwrap()
        .resolve()
        .unwrap();
    let compact_text = text.replace("[solver]", "[solver]\nanderson_history = \"compact\"");
    assert_ne!(compact_text, text, "the demo has a [solver] table");
    let compact = Case::parse(&compact_text, "compact", &base)
        .unwrap()
        .resolve()
        .unwrap();
    assert_eq!(compact.scba.history, qheat::scba::MixerHistory::Compact);
    let history = full.mixer_history_bytes();
    assert!(history > 0);
    assert_eq!(compact.mixer_history_bytes() * 2, history);
    assert_eq!(
        full.memory_estimate_bytes() - compact.memory_estimate_bytes(),
        history / 2
    );
    let first = &full.memory_alternatives()[0];
    assert_eq!(first.0, "solver.anderson_history = \"compact\"");
    assert_eq!(first.1, compact.memory_estimate_bytes());
    assert!(
        compact
            .memory_alternatives()
            .iter()
            .all(|(k, _)| !k.contains("anderson_history"))
    );
    let linear_text = compact_text.replace("mixing = \"anderson\"", "mixing = \"linear\"");
    assert_ne!(linear_text, compact_text);
    let linear = Case::parse(&linear_text, "linear", &base).unwrap();
    let warned = linear.resolve().unwrap().warnings.join("\n");
    assert!(warned.contains("anderson_history is ignored"), "{warned}");
}
