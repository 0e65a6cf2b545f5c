//! Channels: explicit spin, channel-selective regions and results split by
//! channel.

use qheat::case::{Case, CaseKey};
use qheat::observables::channels::{ChannelObservables, observe_channels};
use qheat::observables::{Observables, observe};
use qheat::scba::{Silent, Solution, solve};
use std::path::Path;

fn case(text: &str) -> Case {
    Case::parse(text, "test.toml", Path::new(".")).unwrap_or_else(|e| panic!("{e}"))
}

/// Solve a case and split its results by channel.
fn run(c: &Case) -> (Solution, Observables, Option<ChannelObservables>) {
    let r = c.resolve().unwrap();
    let sol = solve(&r.problem, &r.scba, None, &mut Silent).unwrap();
    let o = observe(&sol);
    let ch = r
        .channels
        .as_ref()
        .map(|set| observe_channels(&sol, set).unwrap());
    (sol, o, ch)
}

/// A 12-cell chain (t ≈ 0.61 eV at a = 0.25 nm, m* = 0.1) with the Fermi
/// level 0.1 eV into the band; `extra` adds keys and tables.
fn chain(extra_device: &str, extra: &str) -> String {
    format!(
        r#"
name = "spin chain"
{extra_top}
[device]
kind = "chain"
spacing_nm = 0.25
length_nm = 3.0
effective_mass = 0.1
{extra_device}
[leads.left]
fermi_level_ev = 0.1
temperature_k = 300
[leads.right]
fermi_level_ev = 0.1
temperature_k = 300
[bias]
voltage_v = 0.02
[grid]
step_ev = 0.002
{extra}
"#,
        extra_top = ""
    )
}

/// Per-channel sums against totals, relative to `scale`.
fn sum_close(parts: &[f64], total: f64, scale: f64, what: &str) {
    let s: f64 = parts.iter().sum();
    assert!(
        (s - total).abs() <= 1e-12 * scale.abs().max(f64::MIN_POSITIVE),
        "{what}: channels sum to {s:e}, total {total:e}"
    );
}

/// A chain with explicit spin (two orbitals per cell, g_s = 1) carries
/// exactly the current of the spinless chain with g_s = 2, and the two
/// spins carry half each (same Hamiltonian for both: common practice).
/// Rounding only separates them: 1e-12.
#[test]
fn explicit_spin_chain_equals_the_spinless_chain_with_degeneracy_two() {
    let spinless = case(&chain("", ""));
    let spin = case(&chain("spin = \"explicit\"", ""));
    let r = spin.resolve().unwrap();
    assert_eq!(r.problem.spin_degeneracy, 1.0);
    assert_eq!(r.problem.device.orbitals, 2);
    let (_, o0, none) = run(&spinless);
    assert!(none.is_none(), "no channels without [[channel]] or spin");
    let (_, o1, ch) = run(&spin);
    let ch = ch.expect("explicit spin defines channels");
    assert_eq!(ch.names, vec!["up", "down"]);
    assert!(o0.current_a.abs() > 1e-7, "{}", o0.current_a);
    // J_Q = J_E − µN is a difference: its rounding is relative to J_E.
    let scale_q = o0.energy_current_left_w.abs();
    for (a, b, scale, what) in [
        (o1.current_a, o0.current_a, o0.current_a, "current"),
        (
            o1.heat_current_left_w,
            o0.heat_current_left_w,
            scale_q,
            "heat current",
        ),
        (
            o1.energy_current_left_w,
            o0.energy_current_left_w,
            scale_q,
            "energy current",
        ),
    ] {
        assert!(
            (a - b).abs() <= 1e-12 * scale.abs(),
            "{what}: {a:e} vs {b:e}"
        );
    }
    for c in 0..2 {
        let half = 0.5 * o0.current_a;
        let got = ch.current_left_a[c];
        assert!(
            (got - half).abs() <= 1e-12 * half.abs(),
            "{got:e} vs {half:e}"
        );
    }
    assert!(ch.polarization.unwrap().abs() < 1e-12);
}

/// Exchange splitting Δ as two channel regions over the whole device:
/// up shifted by −Δ/2, down by +Δ/2 (leads continue the end cells, so they
/// are split alike).
fn split(from_nm: f64, to_nm: f64, up_ev: f64) -> String {
    format!(
        r#"
[[device.region]]
from_nm = {from_nm}
to_nm = {to_nm}
offset_ev = {up_ev}
channels = ["up"]
[[device.region]]
from_nm = {from_nm}
to_nm = {to_nm}
offset_ev = {down_ev}
channels = ["down"]
"#,
        down_ev = -up_ev
    )
}

/// Uniform spin-split chain, parallel: each spin is a perfect chain whose
/// band is shifted by its offset, so T(E) = θ_up + θ_down, the step
/// functions of the two band windows [Ec + ε_σ, Ec + ε_σ + 4t] (a uniform
/// tight-binding chain transmits 1 in its band: common practice). Energies
/// within 1e-3·t of a band edge are skipped (the step is not resolved
/// there); elsewhere rounding only: 1e-9.
#[test]
fn parallel_spin_split_chain_transmits_the_two_band_windows() {
    let delta = 0.06;
    let c = case(&chain(
        &format!("spin = \"explicit\"\n{}", split(0.0, 3.0, -delta / 2.0)),
        "",
    ));
    let r = c.resolve().unwrap();
    let t = r.hopping_ev.unwrap();
    let (_, o, ch) = run(&c);
    let ch = ch.unwrap();
    let tr = ch.transmission.as_ref().expect("coherent");
    let total = o.spectrum.transmission.as_ref().unwrap();
    let mut inside = [0, 0];
    for (k, &e) in o.spectrum.energy_ev.iter().enumerate() {
        for (c, eps) in [(0, -delta / 2.0), (1, delta / 2.0)] {
            let (lo, hi) = (eps, eps + 4.0 * t);
            if (e - lo).abs() < 1e-3 * t || (e - hi).abs() < 1e-3 * t {
                continue;
            }
            let want = if e > lo && e < hi { 1.0 } else { 0.0 };
            inside[c] += (want == 1.0) as usize;
            assert!(
                (tr[c][k] - want).abs() < 1e-9,
                "channel {c} at {e}: {} vs {want}",
                tr[c][k]
            );
        }
        let all: f64 = (0..2).map(|c| tr[c][k]).sum();
        assert!(
            (all - total[k]).abs() <= 1e-12 * total[k].max(1.0),
            "{all} {}",
            total[k]
        );
    }
    // the grid starts below the up band and covers both windows
    assert!(inside[0] > inside[1] && inside[1] > 10, "{inside:?}");
    assert!(o.spectrum.energy_ev[0] < delta / 2.0);
}

/// Antiparallel: the left half split one way, the right half the other.
/// Each spin then sees an abrupt on-site step ε₁ → ε₂ of a nearest-
/// neighbour chain, and wave matching (ψ continued across the step, the
/// two site equations at the junction) gives
/// T_σ = sin k₁ sin k₂ / sin²((k₁ + k₂)/2) with E = ε + 2t(1 − cos k) on
/// each side ("wave matching; common practice", derived again for this
/// test: τ = 2i sin k₁/(e^{ik₂} − e^{−ik₁}), T = (sin k₂/sin k₁)|τ|²).
/// Both spins see the same step mirrored, so T = 2 T_σ in the common
/// window. Exact up to rounding: 1e-10.
#[test]
fn antiparallel_junction_matches_wave_matching() {
    let delta = 0.06;
    let regions = format!(
        "{}{}",
        split(0.0, 1.5, -delta / 2.0),
        split(1.5, 3.0, delta / 2.0)
    );
    let c = case(&chain(&format!("spin = \"explicit\"\n{regions}"), ""));
    let t = c.resolve().unwrap().hopping_ev.unwrap();
    let (_, o, ch) = run(&c);
    let ch = ch.unwrap();
    let tr = ch.transmission.as_ref().unwrap();
    let total = o.spectrum.transmission.as_ref().unwrap();
    let k_of = |e: f64, eps: f64| (1.0 - (e - eps) / (2.0 * t)).acos();
    let mut checked = 0;
    for (k, &e) in o.spectrum.energy_ev.iter().enumerate() {
        if e < delta / 2.0 + 1e-3 || e > 4.0 * t - delta / 2.0 - 1e-3 {
            continue;
        }
        let (k1, k2) = (k_of(e, -delta / 2.0), k_of(e, delta / 2.0));
        let ts = k1.sin() * k2.sin() / ((0.5 * (k1 + k2)).sin().powi(2));
        for (c, row) in tr.iter().enumerate() {
            assert!(
                (row[k] - ts).abs() < 1e-10,
                "spin {c} at {e}: {} vs {ts}",
                row[k]
            );
        }
        assert!(
            (total[k] - 2.0 * ts).abs() < 1e-10,
            "{e}: {} vs {}",
            total[k],
            2.0 * ts
        );
        checked += 1;
    }
    assert!(checked > 20, "{checked}");
    // the step reflects: the closed form is below 1 near the lower edge
    assert!(tr[0].iter().any(|&v| v > 0.0 && v < 0.9));
}

/// A strip of three sites across with channels "edge" = {0} and
/// "far" = {2}: the middle site falls to the implicit channel "other", and
/// the strip's hopping mixes all three. With an inelastic phonon, every
/// per-channel result adds up to its total to rounding (the projectors
/// sum to one): 1e-12 of the scale of the quantity.
#[test]
fn channel_parts_add_up_to_the_totals_with_scattering() {
    let text = r#"
name = "strip channels"
[device]
kind = "strip"
spacing_nm = 0.5
length_nm = 2.0
effective_mass = 0.2
width_sites = 3
[[channel]]
name = "edge"
orbitals = [0]
[[channel]]
name = "far"
orbitals = [2]
[leads.left]
fermi_level_ev = 0.25
temperature_k = 300
[leads.right]
fermi_level_ev = 0.25
temperature_k = 300
[bias]
voltage_v = 0.05
[grid]
step_ev = 0.004
[[phonon]]
energy_ev = 0.02
coupling_ev2 = 0.002
from_nm = 0.0
to_nm = 2.0
"#;
    let c = case(text);
    let r = c.resolve().unwrap();
    assert!(
        r.notes.iter().any(|n| n.contains("\"other\"")),
        "{:?}",
        r.notes
    );
    let (sol, o, ch) = run(&c);
    assert!(sol.report.converged);
    let ch = ch.unwrap();
    assert_eq!(ch.names, vec!["edge", "far", "other"]);
    assert!(ch.transmission.is_none());
    let scale_i = o.current_a.abs();
    sum_close(&ch.current_left_a, o.current_left_a, scale_i, "I_1");
    sum_close(&ch.current_right_a, o.current_right_a, scale_i, "I_2");
    let scale_q = o
        .heat_current_left_w
        .abs()
        .max(o.heat_current_right_w.abs());
    sum_close(
        &ch.heat_current_left_w,
        o.heat_current_left_w,
        scale_q,
        "J_Q,1",
    );
    sum_close(
        &ch.heat_current_right_w,
        o.heat_current_right_w,
        scale_q,
        "J_Q,2",
    );
    let pmax = o
        .sites
        .lattice_power_w
        .iter()
        .fold(0.0f64, |m, p| m.max(p.abs()));
    assert!(pmax > 0.0);
    sum_close(&ch.lattice_power_w, o.lattice_power_w, pmax, "ΣP");
    let spacing = r.problem.device.spacing_nm;
    for i in 0..r.problem.device.cells() {
        let n_total = o.sites.electron_density_per_nm[i] * spacing;
        let parts: Vec<f64> = ch.electrons.iter().map(|c| c[i]).collect();
        sum_close(&parts, n_total, n_total, "electrons");
        let parts: Vec<f64> = ch.cell_lattice_power_w.iter().map(|c| c[i]).collect();
        sum_close(&parts, o.sites.lattice_power_w[i], pmax, "P_i");
        // every channel has states here: its own level is matched, and
        // near the cell's level (a small bias keeps them close)
        for c in 0..3 {
            let mu = ch.fermi_level_ev[c][i];
            assert!(mu.is_finite(), "channel {c} cell {i}");
            assert!((mu - o.sites.fermi_level_ev[i]).abs() < 0.05, "{mu}");
        }
    }
    // per energy too
    for k in 0..o.spectrum.energy_ev.len() {
        let parts: Vec<f64> = ch.flow_left.iter().map(|c| c[k]).collect();
        let scale = o
            .spectrum
            .flow_left
            .iter()
            .fold(0.0f64, |m, v| m.max(v.abs()));
        sum_close(&parts, o.spectrum.flow_left[k], scale, "j_1(E)");
    }
}

/// The coherent transmission of mixing channels adds up to T(E).
#[test]
fn channel_transmissions_of_a_strip_add_up_to_the_total() {
    let text = r#"
name = "strip"
[device]
kind = "strip"
spacing_nm = 0.5
length_nm = 2.0
effective_mass = 0.2
width_sites = 3
[[device.region]]
from_nm = 0.5
to_nm = 1.0
offset_ev = 0.05
[[channel]]
name = "edge"
orbitals = [0, 2]
[leads.left]
fermi_level_ev = 0.25
temperature_k = 300
[leads.right]
fermi_level_ev = 0.25
temperature_k = 300
[grid]
step_ev = 0.004
"#;
    let (_, o, ch) = run(&case(text));
    let ch = ch.unwrap();
    let tr = ch.transmission.unwrap();
    let total = o.spectrum.transmission.unwrap();
    let mut mixed = false;
    for k in 0..total.len() {
        sum_close(&[tr[0][k], tr[1][k]], total[k], total[k].max(1.0), "T(E)");
        mixed |= tr[1][k] > 1e-6 && tr[0][k] > 1e-6;
    }
    assert!(mixed);
}

/// A channel region's value is a numeric key like any region's: `--vary`
/// (through `Case::with`) moves the orbitals of its channel and no other.
#[test]
fn a_channel_region_can_be_swept() {
    let c = case(&chain(
        &format!("spin = \"explicit\"\n{}", split(0.0, 3.0, -0.01)),
        "",
    ));
    assert!(
        c.numeric_keys()
            .contains(&"device.region.1.offset_ev".to_string())
    );
    let key: CaseKey = "device.region.1.offset_ev".parse().unwrap();
    let before = c.resolve().unwrap().problem.device;
    let after = c.with(key, 0.04).unwrap().resolve().unwrap().problem.device;
    let d_up = after.onsite[3][(0, 0)].re - before.onsite[3][(0, 0)].re;
    let d_down = after.onsite[3][(1, 1)].re - before.onsite[3][(1, 1)].re;
    assert_eq!(d_up, 0.0);
    assert!((d_down - 0.03).abs() < 1e-12, "{d_down}");
}

/// Channels that do not exist, overlap, or sit beside explicit spin are
/// refused with the key named.
#[test]
fn bad_channels_are_refused() {
    let bad = [
        (
            chain("", &split(0.0, 3.0, 0.01)),
            "device.region.0.channels",
        ),
        (
            chain(
                "spin = \"explicit\"",
                "[[channel]]\nname = \"a\"\norbitals = [0]\n",
            ),
            "channel",
        ),
        (
            chain("", "[[channel]]\nname = \"a\"\norbitals = [1]\n"),
            "channel",
        ),
        (
            chain(
                "",
                "[[channel]]\nname = \"a\"\norbitals = [0]\n[[channel]]\nname = \"b\"\norbitals = [0]\n",
            ),
            "channel",
        ),
        (
            format!("spin_degeneracy = 2\n{}", chain("spin = \"explicit\"", "")),
            "spin_degeneracy",
        ),
    ];
    for (text, key) in bad {
        let e = Case::parse(&text, "t.toml", Path::new(".")).unwrap_err();
        assert_eq!(e.key.as_deref(), Some(key), "{e}");
    }
}

/// Non-mixing channels are conductors in parallel: G = Σ G_c and the
/// Seebeck coefficient of the whole is the conductance-weighted average
/// Σ G_c S_c / Σ G_c (common practice for parallel thermoelectric
/// conductors; exact here because the moments L0, L1 of T = Σ T_c add).
/// Rounding only: 1e-9. The spin valve of the demo, parallel and flipped to
/// antiparallel.
#[test]
fn channel_seebeck_of_a_spin_valve_weights_to_the_total() {
    use qheat::thermo::channels::ChannelSeebeck;
    use qheat::thermo::of_case::{case_channel_seebeck, case_coefficients};
    let path = Path::new(env!("CARGO_MANIFEST_DIR")).join("cases-demo/spin-valve-seebeck.toml");
    let parallel = Case::load(&path).unwrap();
    let flip = |c: &Case, i: usize, v: f64| -> Case {
        c.with(format!("device.region.{i}.offset_ev").parse().unwrap(), v)
            .unwrap()
    };
    let anti = flip(&flip(&parallel, 2, 0.1), 3, -0.1);
    let mut seebeck = Vec::new();
    for c in [&parallel, &anti] {
        let total = case_coefficients(c, &mut Silent).unwrap().coefficients;
        let Some(ChannelSeebeck::Given(list)) = case_channel_seebeck(c).unwrap() else {
            panic!("spin channels of a chain do not mix")
        };
        assert_eq!(list.len(), 2);
        let g: f64 = list.iter().map(|c| c.conductance_s).sum();
        let gs: f64 = list
            .iter()
            .map(|c| c.conductance_s * c.seebeck_v_per_k)
            .sum();
        assert!(
            (g - total.conductance_s).abs() <= 1e-9 * g,
            "{g} {}",
            total.conductance_s
        );
        let s = gs / g;
        assert!(
            (s - total.seebeck_v_per_k).abs() <= 1e-9 * s.abs(),
            "{s} vs {}",
            total.seebeck_v_per_k
        );
        seebeck.push(total.seebeck_v_per_k);
    }
    // the point of the demo: antiparallel |S| is several times the parallel
    assert!(seebeck[1] / seebeck[0] > 2.5, "{seebeck:?}");
}

/// Channels that the Hamiltonian mixes get no Seebeck coefficient of
/// their own, and the reason names the element that mixes them.
#[test]
fn mixing_channels_get_no_channel_seebeck() {
    use qheat::thermo::channels::{ChannelSeebeck, channel_seebeck};
    let text = r#"
name = "strip"
[device]
kind = "strip"
spacing_nm = 0.5
length_nm = 1.0
effective_mass = 0.2
width_sites = 2
[[channel]]
name = "a"
orbitals = [0]
[leads.left]
fermi_level_ev = 0.25
temperature_k = 300
[leads.right]
fermi_level_ev = 0.25
temperature_k = 300
"#;
    let r = case(text).resolve().unwrap();
    let got = channel_seebeck(&r.problem, r.channels.as_ref().unwrap()).unwrap();
    let ChannelSeebeck::NotGiven(why) = got else {
        panic!("{got:?}")
    };
    assert!(why.contains("on-site block of cell 0"), "{why}");
}

/// A coupling matrix that joins two channels (a spin-flip source) makes
/// them mix, even where H and the leads keep them apart; the same source
/// without the off-diagonal element does not.
#[test]
fn a_spin_flip_coupling_matrix_mixes_the_channels() {
    use qheat::scattering::CouplingMatrices;
    use qheat::thermo::channels::channel_mixing;
    let text = r#"
name = "spin chain"
[device]
kind = "chain"
spacing_nm = 0.5
length_nm = 2.0
effective_mass = 0.2
spin = "explicit"
[leads.left]
fermi_level_ev = 0.25
temperature_k = 300
[leads.right]
fermi_level_ev = 0.25
temperature_k = 300
"#;
    let r = case(text).resolve().unwrap();
    let channels = r.channels.as_ref().unwrap();
    let mut p = r.problem.clone();
    assert_eq!(channel_mixing(&p, channels), None);
    let source = |flip: f64| {
        faer::Mat::from_fn(2, 2, |i, j| {
            qheat::C64::new(if i == j { 0.01 } else { flip }, 0.0)
        })
    };
    let cells = p.device.cells();
    p.scattering.dephasing_matrices = CouplingMatrices {
        per_cell: vec![vec![source(0.0)]; cells],
    };
    assert_eq!(channel_mixing(&p, channels), None);
    p.scattering.dephasing_matrices = CouplingMatrices {
        per_cell: vec![vec![source(0.01)]; cells],
    };
    let why = channel_mixing(&p, channels).expect("a spin-flip source mixes up and down");
    assert!(why.contains("coupling matrix of the dephasing"), "{why}");
}

/// `qheat solve` writes the channel tables and the `channels` summary
/// object when the case names channels, and nothing of them otherwise.
#[test]
fn solve_writes_channel_files_only_for_cases_with_channels() {
    let tmp = tempfile::tempdir().unwrap();
    let run = |text: &str, name: &str| -> std::path::PathBuf {
        let file = tmp.path().join(format!("{name}.toml"));
        std::fs::write(&file, text).unwrap();
        let out = tmp.path().join(name);
        let st = std::process::Command::new(env!("CARGO_BIN_EXE_qheat"))
            .args(["solve", "--quiet", "-o"])
            .arg(&out)
            .arg(&file)
            .output()
            .unwrap();
        assert!(
            st.status.success(),
            "{}",
            String::from_utf8_lossy(&st.stderr)
        );
        out
    };
    let with = run(&chain("spin = \"explicit\"", ""), "with");
    let without = run(&chain("", ""), "without");
    let summary = |dir: &Path| -> serde_json::Value {
        serde_json::from_str(&std::fs::read_to_string(dir.join("summary.json")).unwrap()).unwrap()
    };
    let s = summary(&with);
    let ch = &s["channels"];
    assert_eq!(ch["names"], serde_json::json!(["up", "down"]));
    let i: f64 = ch["current_left_a"]
        .as_array()
        .unwrap()
        .iter()
        .map(|v| v.as_f64().unwrap())
        .sum();
    let total = s["results"]["current_left_a"].as_f64().unwrap();
    assert!((i - total).abs() <= 1e-12 * total.abs(), "{i} {total}");
    let sites = std::fs::read_to_string(with.join("channel_sites.csv")).unwrap();
    assert_eq!(sites.lines().count(), 1 + 2 * 12);
    let spectrum = std::fs::read_to_string(with.join("channel_spectrum.csv")).unwrap();
    assert!(spectrum.starts_with("energy_ev,channel,"));
    assert!(spectrum.lines().next().unwrap().ends_with(",transmission"));
    assert!(summary(&without).get("channels").is_none());
    assert!(!without.join("channel_sites.csv").exists());
    assert!(!without.join("channel_spectrum.csv").exists());
}
