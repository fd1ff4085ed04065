//! Coverage of the estimators' error bars over many replicates of generated legs
//! with exact answers (see scenarios.rs), checked against the targets of issue 14.
//! Run by benches/bench-calibration.sh:
//! `cargo run --release -p legwork-numerics --example calibration -- [scenario] [replicates]`
//! (scenario: all, correlated, poor, components, transient). Exits 1 when a
//! target is missed.

mod scenarios;

use legwork_numerics::estimate::{EstimateOptions, Method};
use scenarios::*;

fn main() {
    let args: Vec<String> = std::env::args().skip(1).collect();
    let which = args.first().map(String::as_str).unwrap_or("all");
    let reps =
        |default: usize| -> usize { args.get(1).and_then(|s| s.parse().ok()).unwrap_or(default) };
    let opts = EstimateOptions::default();
    let mut missed = Vec::new();
    let mut target = |ok: bool, what: String| {
        println!("  {} {what}", if ok { "met   " } else { "MISSED" });
        if !ok {
            missed.push(what);
        }
    };
    let headline = [Method::Mbar, Method::Bar, Method::TiSpline];
    if which == "all" || which == "correlated" {
        let o = run(&Spec::correlated(), &opts, reps(1200), 1);
        print!("{}", describe("correlated legs, default options", &o));
        for m in headline {
            let t = o.of(m);
            target(
                (0.66..=0.72).contains(&t.cover_1()) && (0.93..=0.97).contains(&t.cover_2()),
                format!(
                    "{m}: 1σ {:.1} % in 66–72 %, 2σ {:.1} % in 93–97 %",
                    100.0 * t.cover_1(),
                    100.0 * t.cover_2()
                ),
            );
        }
    }
    if which == "all" || which == "poor" {
        for (phi, seed) in [(0.0, 2), (0.8, 5)] {
            let o = run(&Spec::poor_overlap(phi), &opts, reps(40), seed);
            print!("{}", describe(&format!("poor overlap (φ = {phi})"), &o));
            for m in [
                Method::Mbar,
                Method::Bar,
                Method::ExpForward,
                Method::ExpReverse,
            ] {
                let t = o.of(m);
                target(
                    t.overconfident == 0,
                    format!(
                        "{m}: every σ ≥ |error|/2 or marked unreliable ({} overconfident)",
                        t.overconfident
                    ),
                );
            }
        }
    }
    if which == "all" || which == "components" {
        let o = run(&Spec::two_components(), &opts, reps(300), 3);
        print!("{}", describe("two correlated λ components", &o));
        for m in [Method::Ti, Method::TiSpline] {
            let t = o.of(m);
            target(
                (0.92..=0.98).contains(&t.cover_2()),
                format!("{m}: 2σ {:.1} % in 92–98 %", 100.0 * t.cover_2()),
            );
        }
    }
    if which == "all" || which == "transient" {
        let o = run(&Spec::transient(), &opts, reps(300), 4);
        print!("{}", describe("slow transient (τ = 5 % of the run)", &o));
        for m in headline {
            let z = o.of(m).mean_z();
            target(
                z.abs() < 0.5 || o.drift_share() >= 0.8,
                format!(
                    "{m}: |mean z| {:.2} < 0.5 or drift warned in {:.0} % ≥ 80 %",
                    z.abs(),
                    100.0 * o.drift_share()
                ),
            );
        }
    }
    if !missed.is_empty() {
        eprintln!("{} target(s) missed", missed.len());
        std::process::exit(1);
    }
}
