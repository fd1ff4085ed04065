//! Coverage of the estimators' error bars over many replicates of generated legs
//! with exact answers (see scenarios.rs). Run by benches/bench-calibration.sh:
//! `cargo run --release -p legwork-numerics --example calibration -- [scenario] [replicates]`.

mod scenarios;

use legwork_numerics::estimate::EstimateOptions;
use scenarios::*;

fn main() {
    let args: Vec<String> = std::env::args().skip(1).collect();
    let which = args.first().map(String::as_str).unwrap_or("all");
    let reps =
        |default: usize| -> usize { args.get(1).and_then(|s| s.parse().ok()).unwrap_or(default) };
    let opts = EstimateOptions::default();
    if which == "all" || which == "correlated" {
        let o = run(&Spec::correlated(), &opts, reps(1200), 1);
        print!("{}", describe("correlated legs, default options", &o));
    }
    if which == "plain" {
        use legwork_numerics::estimate::{Equilibration, Subsample};
        for (e, sub) in [
            (Equilibration::None, Subsample::None),
            (Equilibration::None, Subsample::Auto),
            (Equilibration::Auto, Subsample::None),
        ] {
            let o = EstimateOptions {
                equilibration: e,
                subsample: sub,
                ..EstimateOptions::default()
            };
            let r = run(&Spec::correlated(), &o, reps(1200), 1);
            print!(
                "{}",
                describe(&format!("correlated legs, {e:?} {sub:?}"), &r)
            );
        }
    }
    if which == "all" || which == "poor" {
        for phi in [0.0, 0.8] {
            let o = run(&Spec::poor_overlap(phi), &opts, reps(40), 2);
            print!("{}", describe(&format!("poor overlap (φ = {phi})"), &o));
        }
    }
    if which == "all" || which == "components" {
        let o = run(&Spec::two_components(), &opts, reps(300), 3);
        print!("{}", describe("two correlated λ components", &o));
    }
    if which == "all" || which == "transient" {
        let o = run(&Spec::transient(), &opts, reps(300), 4);
        print!("{}", describe("slow transient (τ = 5 % of the run)", &o));
    }
}
