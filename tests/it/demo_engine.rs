//! The demo engine: its samples follow the Boltzmann distribution of the toy system,
//! its correlation is the AR(1) one, its closed-form F(λ) agrees with quadrature, a
//! restarted run reproduces an uninterrupted one byte for byte, each injected fault
//! does what it says, and the shipped exact tables are the engine's own.

use legwork::demo::fault::{FaultAction, Faults};
use legwork::demo::run::{run, RunConfig, RunOutcome};
use legwork::demo::sampler::Ar1Sampler;
use legwork::demo::{ToySystem, Well};
use legwork::units::EnergyUnit;
use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;
use std::os::unix::process::ExitStatusExt;
use std::path::{Path, PathBuf};
use std::process::{Command, Stdio};

const ENGINE: &str = env!("CARGO_BIN_EXE_legwork-demo-engine");
const ROOT: &str = env!("CARGO_MANIFEST_DIR");

fn system(a: Well, b: Well) -> ToySystem {
    ToySystem::new(a, b, 3, 298.15).unwrap()
}

fn unequal() -> ToySystem {
    system(
        Well {
            offset: 1.0,
            k: 2.0,
            shift: 0.0,
        },
        Well {
            offset: -0.5,
            k: 6.0,
            shift: 1.5,
        },
    )
}

fn config(dir: &Path, sys: ToySystem, lambdas: Vec<f64>, state: usize, frames: u64) -> RunConfig {
    RunConfig {
        system: sys,
        temperature_k: 298.15,
        lambdas,
        state,
        frames,
        seed: 42,
        attempt: 1,
        unit: EnergyUnit::KcalPerMol,
        phi: 0.9,
        time_step: 1.0,
        start: None,
        displace: 3.0,
        output: dir.join("window.tsv"),
        checkpoint: Some(dir.join("window.ckpt")),
        checkpoint_every: 100,
        faults: Faults {
            attempts: 1,
            ..Faults::default()
        },
    }
}

/// The data rows of a window table: (time, dudl, u0, u1, …).
fn rows(path: &Path) -> Vec<Vec<f64>> {
    let text = std::fs::read_to_string(path).unwrap();
    text.lines()
        .filter(|l| !l.starts_with('#') && !l.starts_with("time"))
        .map(|l| l.split('\t').map(|v| v.parse().unwrap()).collect())
        .collect()
}

fn mean_var(x: &[f64]) -> (f64, f64) {
    let n = x.len() as f64;
    let m = x.iter().sum::<f64>() / n;
    (
        m,
        x.iter().map(|v| (v - m).powi(2)).sum::<f64>() / (n - 1.0),
    )
}

/// Squared standard error of the mean by block averaging (Flyvbjerg & Petersen 1989,
/// J. Chem. Phys. 91, 461): pairwise-average the series `levels` times and use the
/// naive estimate σ²/(n − 1) of the last level, where the blocks are much longer
/// than the correlation time. Written here, sharing nothing with legwork's estimator.
fn block_sem2(x: &[f64], levels: u32) -> f64 {
    let mut b: Vec<f64> = x.to_vec();
    for _ in 0..levels {
        b = b.chunks_exact(2).map(|p| 0.5 * (p[0] + p[1])).collect();
    }
    let (_, v) = mean_var(&b);
    v / b.len() as f64
}

#[test]
fn positions_have_the_boltzmann_moments() {
    // The stationary law at λ is N(m_λ, kT/k_λ) per coordinate (completing the square,
    // see legwork::demo::system). Errors account for correlation with the textbook AR(1)
    // inefficiencies: g = (1 + φ)/(1 − φ) for x, (1 + φ²)/(1 − φ²) for (x − m)², whose
    // variance is 2σ⁴ for a normal variable.
    let sys = unequal();
    let phi = 0.6;
    let n = 100_000;
    for lam in [0.0, 0.3, 0.7, 1.0] {
        let (m, s) = (sys.center(lam), sys.sigma(lam));
        let mut smp = Ar1Sampler::new(m, s, phi, vec![m, 0.0, 0.0], ChaCha8Rng::seed_from_u64(7));
        let mut xs = Vec::with_capacity(n);
        for _ in 0..n {
            smp.step();
            xs.push(smp.position[0]);
        }
        let (mean, var) = mean_var(&xs);
        let g1 = (1.0 + phi) / (1.0 - phi);
        let g2 = (1.0 + phi * phi) / (1.0 - phi * phi);
        let se_mean = (g1 * s * s / n as f64).sqrt();
        let se_var = (g2 * 2.0 * s.powi(4) / n as f64).sqrt();
        assert!(
            (mean - m).abs() < 4.0 * se_mean,
            "λ={lam}: mean {mean} vs {m} (se {se_mean})"
        );
        assert!(
            (var - s * s).abs() < 4.0 * se_var,
            "λ={lam}: variance {var} vs {} (se {se_var})",
            s * s
        );
    }
}

#[test]
fn emitted_dudl_has_the_analytic_mean_and_variance() {
    // Under N(m, s²I), with y = x − m: dU/dλ = U_B − U_A = const + ℓ y₀ + q|y|², where
    // ℓ = k_B(m − b) − k_A(m − a), q = (k_B − k_A)/2, so
    // E = c_B − c_A + ½k_B((m − b)² + d s²) − ½k_A((m − a)² + d s²) and
    // Var = ℓ² s² + 2d q² s⁴ (Gaussian moments). Standard errors from block averaging.
    let dir = tempfile::tempdir().unwrap();
    let sys = unequal();
    let lambdas = vec![0.0, 0.25, 0.5, 0.75, 1.0];
    for state in [0, 2, 4] {
        let mut cfg = config(dir.path(), sys, lambdas.clone(), state, 40_000);
        cfg.checkpoint = None;
        cfg.phi = 0.5;
        run(&cfg).unwrap();
        let dudl: Vec<f64> = rows(&cfg.output).iter().skip(100).map(|r| r[1]).collect();
        let lam = lambdas[state];
        let (m, s2, d) = (sys.center(lam), sys.sigma(lam).powi(2), 3.0);
        let (a, b) = (sys.a, sys.b);
        let mean_exact = b.offset - a.offset + 0.5 * b.k * ((m - b.shift).powi(2) + d * s2)
            - 0.5 * a.k * ((m - a.shift).powi(2) + d * s2);
        let ell = b.k * (m - b.shift) - a.k * (m - a.shift);
        let q = 0.5 * (b.k - a.k);
        let var_exact = ell * ell * s2 + 2.0 * d * q * q * s2 * s2;
        let (mean, var) = mean_var(&dudl);
        let se_mean = block_sem2(&dudl, 6).sqrt();
        let sq: Vec<f64> = dudl.iter().map(|v| (v - mean).powi(2)).collect();
        let se_var = block_sem2(&sq, 6).sqrt();
        assert!(
            (mean - mean_exact).abs() < 4.0 * se_mean,
            "state {state}: mean {mean} vs {mean_exact} (se {se_mean})"
        );
        assert!(
            (var - var_exact).abs() < 4.0 * se_var,
            "state {state}: variance {var} vs {var_exact} (se {se_var})"
        );
    }
}

#[test]
fn dudl_statistical_inefficiency_is_the_ar1_value() {
    // With k_A = k_B, dU/dλ is linear in x, so its inefficiency is exactly the AR(1)
    // g = (1 + φ)/(1 − φ) (textbook AR(1) result). Measured by block averaging
    // (Flyvbjerg & Petersen 1989): g = N·SEM²/Var at blocks of 2⁷ = 128 frames, where
    // the block estimate's bias for AR(1) is about 2φ/((1 − φ)² B g) ≲ 4%; 15% is the
    // tolerance the engine promises.
    let dir = tempfile::tempdir().unwrap();
    let sys = system(
        Well {
            offset: 0.0,
            k: 3.0,
            shift: 0.0,
        },
        Well {
            offset: 1.0,
            k: 3.0,
            shift: 1.0,
        },
    );
    for phi in [0.5, 0.8] {
        let mut cfg = config(dir.path(), sys, vec![0.0, 1.0], 0, 400_000);
        cfg.checkpoint = None;
        cfg.phi = phi;
        cfg.displace = 0.0;
        run(&cfg).unwrap();
        let dudl: Vec<f64> = rows(&cfg.output).iter().map(|r| r[1]).collect();
        let (_, var) = mean_var(&dudl);
        let g = dudl.len() as f64 * block_sem2(&dudl, 7) / var;
        let expected = (1.0 + phi) / (1.0 - phi);
        assert!(
            (g / expected - 1.0).abs() < 0.15,
            "φ={phi}: block-averaged g = {g}, AR(1) g = {expected}"
        );
    }
}

#[test]
fn energies_are_the_potential_at_every_state() {
    // u_j = (1 − λ_j)u_A + λ_j u_B and dudl = u_B − u_A at the sampled configuration,
    // in the unit asked for (1 kcal = 4.184 kJ, NIST SP 811).
    let dir = tempfile::tempdir().unwrap();
    let lambdas = vec![0.0, 0.2, 0.6, 1.0];
    let mut cfg = config(dir.path(), unequal(), lambdas.clone(), 1, 50);
    run(&cfg).unwrap();
    let a = rows(&cfg.output);
    assert_eq!(a.len(), 50);
    for r in &a {
        let (ua, ub) = (r[2], r[5]);
        assert!((r[1] - (ub - ua)).abs() < 2e-6);
        for (j, l) in lambdas.iter().enumerate() {
            assert!((r[2 + j] - ((1.0 - l) * ua + l * ub)).abs() < 2e-6);
        }
    }
    std::fs::remove_file(cfg.checkpoint.as_ref().unwrap()).unwrap();
    cfg.unit = EnergyUnit::KjPerMol;
    run(&cfg).unwrap();
    let b = rows(&cfg.output);
    for (ra, rb) in a.iter().zip(&b) {
        assert!((rb[3] - 4.184 * ra[3]).abs() < 1e-5);
    }
    let head = std::fs::read_to_string(&cfg.output).unwrap();
    assert!(head.starts_with("# legwork window table 1\n# temperature_K: 298.15\n# energy_unit: kJ/mol\n# state: 1\n# lambdas: 0 0.2 0.6 1\ntime\tdudl\tu0\tu1\tu2\tu3\n"));
}

#[test]
fn a_displaced_start_relaxes_into_equilibrium() {
    // The first frames carry an equilibration transient: the start is 3 widths away
    // per axis, and the mean displacement decays as φ^t (AR(1)).
    let dir = tempfile::tempdir().unwrap();
    let sys = unequal();
    let cfg = config(dir.path(), sys, vec![0.0, 1.0], 0, 2000);
    run(&cfg).unwrap();
    let u0: Vec<f64> = rows(&cfg.output).iter().map(|r| r[2]).collect();
    // ⟨U_A⟩ at λ = 0 is c_A + (d/2)kT (equipartition); the start has ½k·3·(3σ)² = 13.5 kT above c_A.
    let kt = sys.kt;
    assert!((u0[0] - sys.a.offset - 13.5 * kt).abs() < 1e-5);
    let (late, _) = mean_var(&u0[500..]);
    assert!(
        (late - sys.a.offset - 1.5 * kt).abs() < 0.5 * kt,
        "equilibrium ⟨U_A⟩ {late}"
    );
}

fn fresh_run(dir: &Path, cfg: &RunConfig) -> Vec<u8> {
    let mut c = cfg.clone();
    c.output = dir.join("clean.tsv");
    c.checkpoint = None;
    c.faults = Faults {
        attempts: 1,
        ..Faults::default()
    };
    run(&c).unwrap();
    std::fs::read(&c.output).unwrap()
}

#[test]
fn checkpoint_interval_and_restart_do_not_change_the_bytes() {
    let dir = tempfile::tempdir().unwrap();
    let mut cfg = config(dir.path(), unequal(), vec![0.0, 0.5, 1.0], 1, 1000);
    let clean = fresh_run(dir.path(), &cfg);
    cfg.checkpoint_every = 7;
    cfg.faults.fail_after = Some(333);
    assert!(matches!(
        run(&cfg).unwrap(),
        RunOutcome::Fault {
            action: FaultAction::Fail,
            written: 333,
            ..
        }
    ));
    assert_ne!(std::fs::read(&cfg.output).unwrap(), clean);
    cfg.attempt = 2;
    let out = run(&cfg).unwrap();
    assert!(
        matches!(
            out,
            RunOutcome::Completed {
                resumed_from: Some(329),
                ..
            }
        ),
        "{out:?}"
    );
    assert_eq!(std::fs::read(&cfg.output).unwrap(), clean);
    // Running again once complete changes nothing, faults or not.
    cfg.attempt = 1;
    assert!(matches!(
        run(&cfg).unwrap(),
        RunOutcome::Completed { written: 0, .. }
    ));
    assert_eq!(std::fs::read(&cfg.output).unwrap(), clean);
}

#[test]
fn a_window_can_be_extended() {
    let dir = tempfile::tempdir().unwrap();
    let mut cfg = config(dir.path(), unequal(), vec![0.0, 1.0], 1, 800);
    let clean = fresh_run(dir.path(), &cfg);
    cfg.frames = 300;
    run(&cfg).unwrap();
    cfg.frames = 800;
    run(&cfg).unwrap();
    assert_eq!(std::fs::read(&cfg.output).unwrap(), clean);
}

#[test]
fn a_checkpoint_from_other_parameters_is_refused() {
    let dir = tempfile::tempdir().unwrap();
    let mut cfg = config(dir.path(), unequal(), vec![0.0, 1.0], 1, 200);
    cfg.faults.fail_after = Some(150);
    run(&cfg).unwrap();
    cfg.seed = 43;
    let err = run(&cfg).unwrap_err();
    assert!(
        err.is_bad_input() && err.to_string().contains("different parameters"),
        "{err}"
    );
}

#[test]
fn random_failures_follow_the_probability_and_a_later_attempt_succeeds() {
    // With p = 0.5 over 60 seeds, the number failing on attempt 1 is Binomial(60, 0.5):
    // mean 30, sd 3.9; the test allows ±4 sd. Each failing window is then resumed until
    // it succeeds and must equal a clean run.
    let dir = tempfile::tempdir().unwrap();
    let mut failed = 0;
    for seed in 0..60 {
        let mut cfg = config(dir.path(), unequal(), vec![0.0, 1.0], 0, 200);
        cfg.seed = seed;
        cfg.faults.fail_probability = 0.5;
        let clean = fresh_run(dir.path(), &cfg);
        let _ = std::fs::remove_file(cfg.checkpoint.as_ref().unwrap());
        let first = run(&cfg).unwrap();
        let decided_again = {
            let _ = std::fs::remove_file(cfg.checkpoint.as_ref().unwrap());
            run(&cfg).unwrap()
        };
        assert_eq!(
            std::mem::discriminant(&first),
            std::mem::discriminant(&decided_again),
            "seed {seed}: (seed, attempt) decides"
        );
        if matches!(first, RunOutcome::Fault { .. }) {
            failed += 1;
            let mut done = false;
            for attempt in 2..40 {
                cfg.attempt = attempt;
                if let RunOutcome::Completed { .. } = run(&cfg).unwrap() {
                    done = true;
                    break;
                }
            }
            assert!(done, "seed {seed}: no attempt succeeded");
        }
        assert_eq!(std::fs::read(&cfg.output).unwrap(), clean, "seed {seed}");
    }
    assert!(
        (14..=46).contains(&failed),
        "{failed} of 60 failed at p = 0.5"
    );
}

fn engine_args(dir: &Path, frames: u64) -> Vec<String> {
    let s = |v: &str| v.to_string();
    vec![
        s("run"),
        s("--a-offset"),
        s("1.0"),
        s("--a-k"),
        s("2.0"),
        s("--a-shift"),
        s("0"),
        s("--b-offset"),
        s("-0.5"),
        s("--b-k"),
        s("6.0"),
        s("--b-shift"),
        s("1.5"),
        s("--lambdas"),
        s("0,0.1,0.4,0.8,1"),
        s("--state"),
        s("2"),
        s("--seed"),
        s("99"),
        s("--frames"),
        frames.to_string(),
        s("--checkpoint-every"),
        s("50"),
        s("--output"),
        dir.join("window.tsv").display().to_string(),
        s("--checkpoint"),
        dir.join("window.ckpt").display().to_string(),
    ]
}

/// Runs the engine with [`engine_args`]; a flag in `extra` that is already there replaces its value.
fn engine(dir: &Path, frames: u64, extra: &[&str]) -> std::process::Output {
    let mut args = engine_args(dir, frames);
    let mut rest = Vec::new();
    let mut i = 0;
    while i < extra.len() {
        match args.iter().position(|a| a == extra[i]) {
            Some(at) => {
                args[at + 1] = extra[i + 1].to_string();
                i += 2;
            }
            None => {
                rest.push(extra[i].to_string());
                i += 1;
                if i < extra.len() && !extra[i].starts_with("--") {
                    rest.push(extra[i].to_string());
                    i += 1;
                }
            }
        }
    }
    Command::new(ENGINE).args(args).args(rest).output().unwrap()
}

fn clean_bytes(frames: u64) -> Vec<u8> {
    let dir = tempfile::tempdir().unwrap();
    let out = engine(dir.path(), frames, &[]);
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    std::fs::read(dir.path().join("window.tsv")).unwrap()
}

fn data_lines(dir: &Path) -> usize {
    let t = std::fs::read_to_string(dir.join("window.tsv")).unwrap();
    t.lines()
        .filter(|l| !l.starts_with('#') && !l.starts_with("time"))
        .count()
}

#[test]
fn fault_fail_after_exits_nonzero_and_the_rerun_completes() {
    let clean = clean_bytes(400);
    let dir = tempfile::tempdir().unwrap();
    let out = engine(dir.path(), 400, &["--fault-fail-after", "120"]);
    assert_eq!(out.status.code(), Some(1));
    assert!(String::from_utf8_lossy(&out.stderr).contains("injected fault"));
    assert_eq!(data_lines(dir.path()), 120);
    let out = engine(
        dir.path(),
        400,
        &["--fault-fail-after", "120", "--attempt", "2"],
    );
    assert!(out.status.success());
    assert_eq!(std::fs::read(dir.path().join("window.tsv")).unwrap(), clean);
}

#[test]
fn fault_attempts_keeps_deterministic_faults_on_for_later_attempts() {
    let dir = tempfile::tempdir().unwrap();
    let f = ["--fault-fail-after", "10", "--fault-attempts", "2"];
    assert_eq!(
        engine(dir.path(), 400, &[&f[..], &["--attempt", "1"]].concat())
            .status
            .code(),
        Some(1)
    );
    assert_eq!(
        engine(dir.path(), 400, &[&f[..], &["--attempt", "2"]].concat())
            .status
            .code(),
        Some(1)
    );
    assert!(
        engine(dir.path(), 400, &[&f[..], &["--attempt", "3"]].concat())
            .status
            .success()
    );
    assert_eq!(
        std::fs::read(dir.path().join("window.tsv")).unwrap(),
        clean_bytes(400)
    );
}

#[test]
fn fault_truncate_leaves_a_partial_last_line_that_the_rerun_repairs() {
    let clean = clean_bytes(300);
    let dir = tempfile::tempdir().unwrap();
    let out = engine(dir.path(), 300, &["--fault-truncate"]);
    assert!(
        out.status.success(),
        "the truncating engine still reports success"
    );
    let bytes = std::fs::read(dir.path().join("window.tsv")).unwrap();
    assert!(bytes.len() < clean.len() && clean.starts_with(&bytes));
    assert_ne!(bytes.last(), Some(&b'\n'));
    let out = engine(dir.path(), 300, &["--fault-truncate", "--attempt", "2"]);
    assert!(out.status.success());
    assert_eq!(std::fs::read(dir.path().join("window.tsv")).unwrap(), clean);
}

#[test]
fn fault_signal_kills_the_process_and_the_rerun_completes() {
    let clean = clean_bytes(300);
    for (name, num) in [("KILL", 9), ("SIGTERM", 15), ("11", 11)] {
        let dir = tempfile::tempdir().unwrap();
        let out = engine(dir.path(), 300, &["--fault-signal", name]);
        assert_eq!(out.status.signal(), Some(num), "{name}");
        let out = engine(dir.path(), 300, &["--fault-signal", name, "--attempt", "2"]);
        assert!(out.status.success());
        assert_eq!(
            std::fs::read(dir.path().join("window.tsv")).unwrap(),
            clean,
            "{name}"
        );
    }
    let dir = tempfile::tempdir().unwrap();
    let out = engine(dir.path(), 300, &["--fault-signal", "NOPE"]);
    assert_eq!(out.status.code(), Some(2));
}

#[test]
fn fault_hang_sleeps_until_killed_and_the_rerun_completes() {
    // A walltime kill: the process hangs half-way on attempt 2 only; an outside SIGTERM
    // ends it; attempt 3 resumes from the last checkpoint and matches a clean run.
    let clean = clean_bytes(400);
    let dir = tempfile::tempdir().unwrap();
    assert!(engine(dir.path(), 400, &["--fault-hang-attempt", "2"])
        .status
        .success());
    std::fs::remove_file(dir.path().join("window.ckpt")).unwrap();
    let mut child = Command::new(ENGINE)
        .args(engine_args(dir.path(), 400))
        .args(["--fault-hang-attempt", "2", "--attempt", "2"])
        .stderr(Stdio::null())
        .spawn()
        .unwrap();
    // Wait until it has flushed half the frames, then give it a moment to (not) exit.
    while data_lines(dir.path()) < 200 {
        std::thread::sleep(std::time::Duration::from_millis(5));
    }
    std::thread::sleep(std::time::Duration::from_millis(300));
    assert!(
        child.try_wait().unwrap().is_none(),
        "the hanging engine exited by itself"
    );
    nix::sys::signal::kill(
        nix::unistd::Pid::from_raw(child.id() as i32),
        nix::sys::signal::Signal::SIGTERM,
    )
    .unwrap();
    assert_eq!(child.wait().unwrap().signal(), Some(15));
    let out = engine(
        dir.path(),
        400,
        &["--fault-hang-attempt", "2", "--attempt", "3"],
    );
    assert!(out.status.success());
    assert!(
        String::from_utf8_lossy(&out.stderr).contains("resumed from the checkpoint at frame 200")
    );
    assert_eq!(std::fs::read(dir.path().join("window.tsv")).unwrap(), clean);
}

#[test]
fn bad_arguments_say_what_is_wrong_and_exit_2() {
    let dir = tempfile::tempdir().unwrap();
    let out = engine(dir.path(), 100, &["--state", "9"]);
    assert_eq!(out.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&out.stderr)
        .contains("state 9 does not exist: the leg has 5 states"));
    let out = engine(dir.path(), 100, &["--phi", "1.0"]);
    assert_eq!(out.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&out.stderr).contains("phi"));
}

#[test]
fn production_starts_from_the_prepared_configuration() {
    let dir = tempfile::tempdir().unwrap();
    let start = dir.path().join("start.txt");
    let out = Command::new(ENGINE)
        .args([
            "prepare",
            "--a-k",
            "2.0",
            "--a-shift",
            "0",
            "--displace",
            "2",
            "--output",
        ])
        .arg(&start)
        .output()
        .unwrap();
    assert!(out.status.success());
    let s = std::fs::read_to_string(&start).unwrap();
    let out = engine(dir.path(), 10, &["--start", start.to_str().unwrap()]);
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    // First frame = the prepared configuration: x = 2σ_A per axis, so u_A = c_A + ½k_A·3·4σ² = 1 + 6 kT.
    let kt = unequal().kt;
    let first = &rows(&dir.path().join("window.tsv"))[0];
    assert!(
        (first[2] - (1.0 + 6.0 * kt)).abs() < 1e-5,
        "{s} → u0 = {}",
        first[2]
    );
}

fn python() -> Option<String> {
    match std::env::var("LEGWORK_PYTHON") {
        Ok(p) if !p.is_empty() => Some(p),
        _ => {
            crate::skip::skipped("demo engine F(λ) vs scipy quadrature (set LEGWORK_PYTHON)");
            None
        }
    }
}

#[test]
fn free_energy_matches_numerical_quadrature() {
    // The closed-form F(λ) against −kT ln ∫exp(−U_λ/kT)dx by scipy.integrate.quad
    // (tests/python/demo_free_energy.py), for several systems, units and dimensions.
    let Some(py) = python() else { return };
    let cases: [(&[&str], &str); 3] = [
        (
            &[
                "--a-offset",
                "1.0",
                "--a-k",
                "2.0",
                "--a-shift",
                "0",
                "--b-offset",
                "-0.5",
                "--b-k",
                "6.0",
                "--b-shift",
                "1.5",
            ],
            "kcal/mol",
        ),
        (
            &[
                "--a-offset",
                "0",
                "--a-k",
                "12",
                "--a-shift",
                "-1",
                "--b-offset",
                "2",
                "--b-k",
                "3",
                "--b-shift",
                "3.2",
                "--dimensions",
                "2",
            ],
            "kJ/mol",
        ),
        (
            &[
                "--a-offset",
                "-3",
                "--a-k",
                "5",
                "--a-shift",
                "0.4",
                "--b-offset",
                "-3",
                "--b-k",
                "5",
                "--b-shift",
                "0.4",
                "--temperature",
                "310",
            ],
            "kT",
        ),
    ];
    for (args, unit) in cases {
        let out = Command::new(ENGINE)
            .args([
                "run",
                "--exact",
                "--json",
                "--unit",
                unit,
                "--lambdas",
                "0,0.05,0.3,0.5,0.77,1",
            ])
            .args(args)
            .output()
            .unwrap();
        assert!(out.status.success());
        let mut full: Vec<String> = args.iter().map(|s| s.to_string()).collect();
        full.extend(["--unit".into(), unit.into()]);
        let check = Command::new(&py)
            .arg(Path::new(ROOT).join("tests/python/demo_free_energy.py"))
            .args(&full)
            .stdin(Stdio::piped())
            .stdout(Stdio::piped())
            .stderr(Stdio::piped())
            .spawn()
            .and_then(|mut c| {
                use std::io::Write;
                c.stdin.take().unwrap().write_all(&out.stdout)?;
                c.wait_with_output()
            })
            .unwrap();
        assert!(
            check.status.success(),
            "{}{}",
            String::from_utf8_lossy(&check.stdout),
            String::from_utf8_lossy(&check.stderr)
        );
    }
}

fn ligand_table() -> Vec<legwork::demo::scenario::Ligand> {
    legwork::demo::scenario::read_ligands(&Path::new(ROOT).join("demo-data/ligands.csv")).unwrap()
}

#[test]
fn shipped_exact_tables_are_the_engines() {
    let dir = tempfile::tempdir().unwrap();
    let root = PathBuf::from(ROOT);
    let out = Command::new(ENGINE)
        .args(["tables", "--ligands"])
        .arg(root.join("demo-data/ligands.csv"))
        .arg("--edges")
        .arg(root.join("campaigns/demo.yaml"))
        .arg("--out-dir")
        .arg(dir.path())
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    for f in ["exact.csv", "exact-ligands.csv", "measured.csv"] {
        assert_eq!(
            std::fs::read_to_string(dir.path().join(f)).unwrap(),
            std::fs::read_to_string(root.join("demo-data").join(f)).unwrap(),
            "demo-data/{f} is stale: regenerate it (demo-data/README.md)"
        );
    }
    // Each edge's ddg_exact is ΔG_complex − ΔG_solvent as `run --exact` prints them.
    let ligands = ligand_table();
    let exact = std::fs::read_to_string(root.join("demo-data/exact.csv")).unwrap();
    let per_ligand: std::collections::HashMap<String, f64> =
        std::fs::read_to_string(root.join("demo-data/exact-ligands.csv"))
            .unwrap()
            .lines()
            .skip(1)
            .map(|l| {
                let (id, v) = l.split_once(',').unwrap();
                (id.to_string(), v.parse().unwrap())
            })
            .collect();
    assert!(
        per_ligand.values().sum::<f64>().abs() < 1e-5,
        "relative to the series mean"
    );
    let mut n = 0;
    for line in exact.lines().skip(1) {
        let f: Vec<&str> = line.split(',').collect();
        let (a, b) = (
            ligands.iter().find(|l| l.id == f[0]).unwrap(),
            ligands.iter().find(|l| l.id == f[1]).unwrap(),
        );
        let leg = |env: &str| {
            let (wa, wb) = (a.well(env).unwrap(), b.well(env).unwrap());
            let args = [
                "run".to_string(),
                "--exact".into(),
                "--json".into(),
                "--lambdas".into(),
                "0,1".into(),
                "--a-offset".into(),
                wa.offset.to_string(),
                "--a-k".into(),
                wa.k.to_string(),
                "--a-shift".into(),
                wa.shift.to_string(),
                "--b-offset".into(),
                wb.offset.to_string(),
                "--b-k".into(),
                wb.k.to_string(),
                "--b-shift".into(),
                wb.shift.to_string(),
            ];
            let out = Command::new(ENGINE).args(args).output().unwrap();
            let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
            v["delta_g"].as_f64().unwrap()
        };
        let ddg = leg("complex") - leg("solvent");
        let shipped: f64 = f[2].parse().unwrap();
        assert!((ddg - shipped).abs() < 1e-6, "{line}: engine says {ddg}");
        assert!(
            (shipped - (per_ligand[f[1]] - per_ligand[f[0]])).abs() < 2e-6,
            "{line}: edge vs per-ligand table"
        );
        n += 1;
    }
    assert_eq!(n, 10);
}

#[test]
fn the_scenario_spans_about_four_kcal_per_mol() {
    let dir = Path::new(ROOT).join("demo-data/exact-ligands.csv");
    let v: Vec<f64> = std::fs::read_to_string(dir)
        .unwrap()
        .lines()
        .skip(1)
        .map(|l| l.split(',').nth(1).unwrap().parse().unwrap())
        .collect();
    let span =
        v.iter().cloned().fold(f64::MIN, f64::max) - v.iter().cloned().fold(f64::MAX, f64::min);
    assert_eq!(v.len(), 8);
    assert!((3.5..=4.5).contains(&span), "span {span}");
    let measured = std::fs::read_to_string(Path::new(ROOT).join("demo-data/measured.csv")).unwrap();
    assert!(measured.starts_with("# INVENTED DATA"));
    assert!(
        measured.lines().any(|l| l.ends_with(",nM"))
            && measured.lines().any(|l| l.ends_with(",kcal/mol"))
    );
}

fn render(template: &str, ctx: &serde_json::Value) -> String {
    let mut t = tera::Tera::default();
    legwork::render::register_filters(&mut t);
    let src =
        std::fs::read_to_string(Path::new(ROOT).join("templates/demo").join(template)).unwrap();
    t.add_raw_template(template, &src).unwrap();
    t.render(template, &tera::Context::from_value(ctx.clone()).unwrap())
        .unwrap()
}

/// A stage-template context (README, "Templates and their variables") for edge ork-01+ork-05, leg complex, replica 1.
fn stage_context(
    root: &Path,
    stage: &str,
    window: Option<usize>,
    vars: serde_json::Value,
) -> serde_json::Value {
    use serde_json::json;
    let ligands = ligand_table();
    // Vars as read from a CSV: text.
    let lig = |id: &str| {
        let l = ligands.iter().find(|l| l.id == id).unwrap();
        let mut v = serde_json::Map::new();
        for env in ["complex", "solvent"] {
            let w = l.well(env).unwrap();
            v.insert(format!("{env}_offset"), json!(w.offset.to_string()));
            v.insert(format!("{env}_k"), json!(w.k.to_string()));
            v.insert(format!("{env}_shift"), json!(w.shift.to_string()));
        }
        json!({"id": id, "vars": v})
    };
    let lambdas: Vec<f64> = (0..12)
        .map(|i| 0.5 * (1.0 - (std::f64::consts::PI * i as f64 / 11.0).cos()))
        .collect();
    let leg_dir = root.join("ork-01+ork-05/complex/r1");
    let dir = match window {
        Some(w) => leg_dir.join(format!("w{w:02}")).join(stage),
        None => leg_dir.join(stage),
    };
    std::fs::create_dir_all(&dir).unwrap();
    let mut all_vars =
        json!({"dimensions": 3, "phi": 0.9, "checkpoint_every": 500, "environment": "complex"});
    for (k, v) in vars.as_object().unwrap() {
        all_vars[k] = v.clone();
    }
    json!({
        "campaign": {"name": "orrin-demo", "seed": 20261201, "temperature_K": 298.15, "unit": "kcal/mol",
                     "file": root.join("demo.yaml"), "dir": root, "root": root},
        "task": {"id": "t", "dir": dir, "stage": stage, "attempt": 1, "restart": false, "seed": 987654321u64,
                 "frames": 2000, "output": "window.tsv"},
        "subject": {"id": "ork-01+ork-05", "kind": "edge"},
        "edge": {"id": "ork-01+ork-05", "a": "ork-01", "b": "ork-05", "vars": {}},
        "ligand_a": lig("ork-01"), "ligand_b": lig("ork-05"),
        "leg": {"name": "complex", "sign": 1, "replicas": 2, "windows": 12},
        "replica": 1,
        "window": window.map(|w| json!({"index": w, "lambda": lambdas[w], "lambdas": {"lambda": lambdas[w]}})),
        "states": lambdas.iter().enumerate().map(|(i, l)| json!({"index": i, "lambda": l, "lambdas": {"lambda": l}})).collect::<Vec<_>>(),
        "lambdas": lambdas, "components": ["lambda"],
        "stage": {"name": stage, "per": if window.is_some() { "window" } else { "leg" }, "frames": 2000, "output": "window.tsv"},
        "after": {"prepare": {"dir": leg_dir.join("prepare"), "id": "ork-01+ork-05/complex/r1/prepare"}},
        "vars": all_vars,
        "legwork": {"version": "0", "exe": ENGINE, "bin_dir": Path::new(ENGINE).parent().unwrap()},
    })
}

fn bash(script: &str, dir: &Path) -> std::process::Output {
    let path = dir.join("task.sh");
    std::fs::write(&path, script).unwrap();
    Command::new("bash").arg(&path).output().unwrap()
}

#[test]
fn the_demo_stage_templates_run_the_engine() {
    // prepare, then one production window, rendered from the shipped templates with a
    // A stage-template context (in a directory with a space, to exercise the quoting).
    let tmp = tempfile::tempdir().unwrap();
    let root = tmp.path().join("orrin demo");
    let prep = stage_context(&root, "prepare", None, serde_json::json!({}));
    let out = bash(&render("prepare.sh.tera", &prep), tmp.path());
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let prod = stage_context(&root, "production", Some(7), serde_json::json!({}));
    let script = render("production.sh.tera", &prod);
    assert!(script.contains("--fault-fail-probability 0 "));
    assert!(!script.contains("--fault-truncate") && !script.contains("--fault-signal"));
    let out = bash(&script, tmp.path());
    assert!(
        out.status.success(),
        "{script}\n{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let table = root.join("ork-01+ork-05/complex/r1/w07/production/window.tsv");
    let text = std::fs::read_to_string(&table).unwrap();
    assert!(text.contains("# state: 7\n"));
    let header: Vec<f64> = text
        .lines()
        .find_map(|l| l.strip_prefix("# lambdas: "))
        .unwrap()
        .split(' ')
        .map(|v| v.parse().unwrap())
        .collect();
    let sent: Vec<f64> = prod["lambdas"]
        .as_array()
        .unwrap()
        .iter()
        .map(|v| v.as_f64().unwrap())
        .collect();
    assert_eq!(header, sent, "the table's λ list is the leg's, bit for bit");
    assert_eq!(rows(&table).len(), 2000);
    assert_eq!(rows(&table)[0].len(), 14);
    // The first frame is the prepared start: ligand ork-01's complex well (k = 4, at 0)
    // displaced 3σ per axis, so u_A = c_A + ½·4·3·9σ² = c_A + 13.5 kT.
    let kt = unequal().kt;
    assert!((rows(&table)[0][2] - (-2.0 + 13.5 * kt)).abs() < 1e-5);
}

#[test]
fn the_production_template_wires_the_fault_vars() {
    let tmp = tempfile::tempdir().unwrap();
    let root = tmp.path().join("r");
    let vars = serde_json::json!({"fault_fail_after": 300, "fault_truncate": true, "fault_signal": "TERM",
                                  "fault_hang_attempt": 4, "fault_fail_probability": 0.25, "fault_attempts": 2});
    let script = render(
        "production.sh.tera",
        &stage_context(&root, "production", Some(0), vars),
    );
    for flag in [
        "--fault-fail-after 300",
        "--fault-truncate",
        "--fault-signal TERM",
        "--fault-hang-attempt 4",
        "--fault-fail-probability 0.25",
        "--fault-attempts 2",
    ] {
        assert!(script.contains(flag), "{flag} missing in\n{script}");
    }
    let prep = stage_context(&root, "prepare", None, serde_json::json!({}));
    assert!(bash(&render("prepare.sh.tera", &prep), tmp.path())
        .status
        .success());
    // fail_after fires first (300 frames), exit 1.
    let out = bash(&script, tmp.path());
    assert_eq!(
        out.status.code(),
        Some(1),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
}

#[test]
fn the_demo_campaign_checks_expands_and_one_window_runs() {
    let legwork = env!("CARGO_BIN_EXE_legwork");
    let campaign = Path::new(ROOT).join("campaigns/demo.yaml");
    let check = Command::new(legwork)
        .arg("check")
        .arg(&campaign)
        .output()
        .unwrap();
    assert!(
        check.status.success(),
        "{}",
        String::from_utf8_lossy(&check.stderr)
    );
    let tmp = tempfile::tempdir().unwrap();
    let root = tmp.path().join("tree");
    let expand = Command::new(legwork)
        .arg("expand")
        .arg(&campaign)
        .arg("--root")
        .arg(&root)
        .arg("-q")
        .output()
        .unwrap();
    assert!(
        expand.status.success(),
        "{}",
        String::from_utf8_lossy(&expand.stderr)
    );
    let leg = root.join("ork-07+ork-08/solvent/r1");
    for script in [
        leg.join("prepare/task.sh"),
        leg.join("w11/production/task.sh"),
    ] {
        let out = Command::new("bash").arg(&script).output().unwrap();
        assert!(
            out.status.success(),
            "{}: {}",
            script.display(),
            String::from_utf8_lossy(&out.stderr)
        );
    }
    let table = leg.join("w11/production/window.tsv");
    let text = std::fs::read_to_string(&table).unwrap();
    assert!(text.contains("# state: 11\n") && text.contains("# energy_unit: kcal/mol\n"));
    assert_eq!(rows(&table).len(), 2000);
    assert_eq!(rows(&table)[0].len(), 14);
    // State 11 is λ = 1: u11 is ligand ork-08's solvent well, c = −0.5 plus a non-negative term.
    assert!(rows(&table).iter().all(|r| r[13] >= -0.5));
}

#[test]
fn a_damaged_checkpoint_means_starting_over() {
    let dir = tempfile::tempdir().unwrap();
    let mut cfg = config(dir.path(), unequal(), vec![0.0, 1.0], 1, 300);
    let clean = fresh_run(dir.path(), &cfg);
    cfg.faults.fail_after = Some(150);
    run(&cfg).unwrap();
    std::fs::write(cfg.checkpoint.as_ref().unwrap(), "{\"format\": trunc").unwrap();
    cfg.attempt = 2;
    match run(&cfg).unwrap() {
        RunOutcome::Completed {
            resumed_from: None,
            notes,
            ..
        } => assert!(notes[0].contains("starting the window over"), "{notes:?}"),
        other => panic!("{other:?}"),
    }
    assert_eq!(std::fs::read(&cfg.output).unwrap(), clean);
}

#[test]
fn the_time_column_counts_frames_in_time_steps() {
    let dir = tempfile::tempdir().unwrap();
    let mut cfg = config(dir.path(), unequal(), vec![0.0, 1.0], 0, 5);
    cfg.time_step = 0.1;
    run(&cfg).unwrap();
    let text = std::fs::read_to_string(&cfg.output).unwrap();
    let times: Vec<&str> = text
        .lines()
        .skip(6)
        .map(|l| l.split('\t').next().unwrap())
        .collect();
    assert_eq!(times, ["0", "0.1", "0.2", "0.3", "0.4"]);
}
