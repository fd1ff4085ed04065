//! legwork's demo engine: one window of the toy two-well system (see `legwork::demo`).
//!
//! `run` writes a window table (or, with `--exact`, prints the analytic answers),
//! `prepare` writes a leg's starting configuration, `tables` writes the demo
//! scenario's exact answers and invented measurements.

use clap::{Args, Parser, Subcommand};
use legwork::demo::fault::{FaultAction, Faults};
use legwork::demo::run::{exact, run, RunConfig, RunOutcome};
use legwork::demo::{scenario, start, DemoError, ToySystem, Well};
use legwork::units::EnergyUnit;
use std::path::PathBuf;
use std::process::ExitCode;

#[derive(Parser)]
#[command(
    name = "legwork-demo-engine",
    version,
    about = "legwork's demo engine: a toy system whose free energies are known exactly"
)]
struct Cli {
    #[command(subcommand)]
    command: Command,
}

#[derive(Subcommand)]
enum Command {
    /// Sample one window and write its window table (resumes from --checkpoint when that file exists)
    Run(Box<RunArgs>),
    /// Write a leg's starting configuration: end state A's centre displaced by --displace widths per axis
    Prepare(PrepareArgs),
    /// Write exact.csv, exact-ligands.csv and measured.csv for a ligand table and an edge list
    Tables(TablesArgs),
}

#[derive(Args)]
struct SystemArgs {
    /// offset c_A of end state A (kcal/mol)
    #[arg(long, allow_negative_numbers = true)]
    a_offset: f64,
    /// force constant k_A of end state A (kcal/mol/Å²)
    #[arg(long)]
    a_k: f64,
    /// position of A's well on the first axis (Å)
    #[arg(long, allow_negative_numbers = true)]
    a_shift: f64,
    /// offset c_B of end state B (kcal/mol)
    #[arg(long, allow_negative_numbers = true)]
    b_offset: f64,
    /// force constant k_B of end state B (kcal/mol/Å²)
    #[arg(long)]
    b_k: f64,
    /// position of B's well on the first axis (Å)
    #[arg(long, allow_negative_numbers = true)]
    b_shift: f64,
    /// spatial dimensions of the particle
    #[arg(long, default_value_t = 3)]
    dimensions: usize,
    /// temperature (K)
    #[arg(long, default_value_t = 298.15)]
    temperature: f64,
}

#[derive(Args)]
struct RunArgs {
    #[command(flatten)]
    system: SystemArgs,
    /// λ of every state of the leg, comma-separated, in index order
    #[arg(long, value_delimiter = ',', required = true)]
    lambdas: Vec<f64>,
    /// 0-based index of the state this window samples
    #[arg(long, default_value_t = 0)]
    state: usize,
    /// energy unit of the table and of --exact: kcal/mol, kJ/mol or kT
    #[arg(long, default_value = "kcal/mol")]
    unit: EnergyUnit,
    /// print the analytic ΔG and F at every state instead of sampling
    #[arg(long)]
    exact: bool,
    /// with --exact: print JSON
    #[arg(long, requires = "exact")]
    json: bool,
    /// frames to write
    #[arg(long, default_value_t = 2000)]
    frames: u64,
    /// seed of the sampling stream
    #[arg(long, default_value_t = 1)]
    seed: u64,
    /// attempt number (from 1); only the injected faults depend on it
    #[arg(long, default_value_t = 1)]
    attempt: u32,
    /// AR(1) correlation per frame, 0 ≤ φ < 1 (statistical inefficiency (1 + φ)/(1 − φ))
    #[arg(long, default_value_t = 0.9)]
    phi: f64,
    /// time between frames (ps), for the time column
    #[arg(long, default_value_t = 1.0)]
    time_step: f64,
    /// starting configuration written by `prepare` (default: this state's centre displaced by --displace widths)
    #[arg(long)]
    start: Option<PathBuf>,
    /// displacement of the default start, in thermal widths per axis (ignored with --start)
    #[arg(long, default_value_t = 3.0)]
    displace: f64,
    /// the window table to write
    #[arg(long, required_unless_present = "exact")]
    output: Option<PathBuf>,
    /// checkpoint file: written every --checkpoint-every frames; when it exists at start, the run resumes from it
    #[arg(long)]
    checkpoint: Option<PathBuf>,
    /// frames between checkpoints (the output is flushed at each)
    #[arg(long, default_value_t = 500)]
    checkpoint_every: u64,
    /// fault: exit 1 once this process has written this many frames
    #[arg(long)]
    fault_fail_after: Option<u64>,
    /// fault: fail with this probability, drawn from (seed, attempt)
    #[arg(long, default_value_t = 0.0)]
    fault_fail_probability: f64,
    /// fault: on this attempt, stop half-way and sleep until killed
    #[arg(long)]
    fault_hang_attempt: Option<u32>,
    /// fault: write half of the last line, skip the final checkpoint, exit 0
    #[arg(long)]
    fault_truncate: bool,
    /// fault: half-way, die by this signal (name like TERM/SIGKILL or number)
    #[arg(long)]
    fault_signal: Option<String>,
    /// the deterministic faults (fail-after, truncate, signal) fire on attempts 1..=N
    #[arg(long, default_value_t = 1)]
    fault_attempts: u32,
}

#[derive(Args)]
struct PrepareArgs {
    /// force constant k_A of end state A (kcal/mol/Å²)
    #[arg(long)]
    a_k: f64,
    /// position of A's well on the first axis (Å)
    #[arg(long, allow_negative_numbers = true)]
    a_shift: f64,
    /// spatial dimensions of the particle
    #[arg(long, default_value_t = 3)]
    dimensions: usize,
    /// temperature (K)
    #[arg(long, default_value_t = 298.15)]
    temperature: f64,
    /// displacement from A's centre, in thermal widths √(kT/k_A) per axis
    #[arg(long, default_value_t = 3.0, allow_negative_numbers = true)]
    displace: f64,
    /// the starting-configuration file to write
    #[arg(long)]
    output: PathBuf,
}

#[derive(Args)]
struct TablesArgs {
    /// the ligand table (id, complex_offset, complex_k, complex_shift, solvent_offset, solvent_k, solvent_shift)
    #[arg(long)]
    ligands: PathBuf,
    /// the edge list: a CSV with header a,b, or a campaign file's `edges:`
    #[arg(long)]
    edges: PathBuf,
    /// spatial dimensions of the particle
    #[arg(long, default_value_t = 3)]
    dimensions: usize,
    /// temperature (K)
    #[arg(long, default_value_t = 298.15)]
    temperature: f64,
    /// absolute level of the invented measurements (kcal/mol)
    #[arg(long, default_value_t = -9.0, allow_negative_numbers = true)]
    baseline: f64,
    /// standard deviation of the invented measurement noise (kcal/mol)
    #[arg(long, default_value_t = 0.4)]
    noise: f64,
    /// seed of the invented measurement noise
    #[arg(long, default_value_t = 20261201)]
    noise_seed: u64,
    /// directory to write exact.csv, exact-ligands.csv and measured.csv into
    #[arg(long)]
    out_dir: PathBuf,
}

fn system(a: &SystemArgs) -> Result<ToySystem, DemoError> {
    ToySystem::new(
        Well {
            offset: a.a_offset,
            k: a.a_k,
            shift: a.a_shift,
        },
        Well {
            offset: a.b_offset,
            k: a.b_k,
            shift: a.b_shift,
        },
        a.dimensions,
        a.temperature,
    )
}

fn parse_signal(s: &str) -> Result<i32, DemoError> {
    use nix::sys::signal::Signal;
    let sig = match s.parse::<i32>() {
        Ok(n) => Signal::try_from(n).ok(),
        Err(_) => {
            let name = if s.starts_with("SIG") {
                s.to_string()
            } else {
                format!("SIG{s}")
            };
            name.to_uppercase().parse::<Signal>().ok()
        }
    };
    sig.map(|s| s as i32).ok_or_else(|| {
        DemoError::parameter(
            "fault-signal",
            format!("'{s}' is not a signal: use a name like TERM or KILL, or a number"),
        )
    })
}

fn do_run(a: RunArgs) -> Result<ExitCode, DemoError> {
    let sys = system(&a.system)?;
    let t = a.system.temperature;
    if a.exact {
        let report = exact(&sys, &a.lambdas, a.unit, t);
        if a.json {
            println!(
                "{}",
                serde_json::to_string_pretty(&report).expect("serialisable")
            );
        } else {
            println!(
                "ΔG = {:.6} {}  (T = {t} K, d = {})",
                report.delta_g, a.unit, sys.dimensions
            );
            println!("state\tlambda\tF\tF - F(state 0)");
            for s in &report.states {
                println!(
                    "{}\t{}\t{:.6}\t{:.6}",
                    s.index, s.lambda, s.free_energy, s.relative
                );
            }
        }
        return Ok(ExitCode::SUCCESS);
    }
    let start = a
        .start
        .as_deref()
        .map(|p| start::read(p, sys.dimensions))
        .transpose()?;
    let cfg = RunConfig {
        system: sys,
        temperature_k: t,
        lambdas: a.lambdas,
        state: a.state,
        frames: a.frames,
        seed: a.seed,
        attempt: a.attempt,
        unit: a.unit,
        phi: a.phi,
        time_step: a.time_step,
        start,
        displace: a.displace,
        output: a.output.expect("clap requires --output without --exact"),
        checkpoint: a.checkpoint,
        checkpoint_every: a.checkpoint_every,
        faults: Faults {
            fail_after: a.fault_fail_after,
            fail_probability: a.fault_fail_probability,
            hang_attempt: a.fault_hang_attempt,
            truncate: a.fault_truncate,
            signal: a.fault_signal.as_deref().map(parse_signal).transpose()?,
            attempts: a.fault_attempts,
        },
    };
    match run(&cfg)? {
        RunOutcome::Completed {
            resumed_from,
            notes,
            ..
        } => {
            for n in notes {
                eprintln!("legwork-demo-engine: {n}");
            }
            if let Some(f) = resumed_from {
                eprintln!("legwork-demo-engine: resumed from the checkpoint at frame {f}");
            }
            Ok(ExitCode::SUCCESS)
        }
        RunOutcome::Fault {
            action, written, ..
        } => {
            eprintln!("legwork-demo-engine: injected fault after {written} frames: {action:?}");
            match action {
                FaultAction::Fail => Ok(ExitCode::from(1)),
                FaultAction::Hang => loop {
                    std::thread::sleep(std::time::Duration::from_secs(3600));
                },
                FaultAction::Signal(sig) => {
                    use nix::sys::signal::{raise, signal, SigHandler, Signal};
                    let sig = Signal::try_from(sig).expect("parsed earlier");
                    // The Rust runtime handles SIGSEGV and SIGBUS itself; restore the
                    // default action so the process dies by the signal as asked.
                    // SAFETY: single-threaded here, and SigDfl installs no handler code.
                    let _ = unsafe { signal(sig, SigHandler::SigDfl) };
                    let _ = raise(sig);
                    // Signals whose default action is not to terminate land here.
                    Ok(ExitCode::from(128u8.wrapping_add(sig as u8)))
                }
            }
        }
    }
}

fn do_prepare(a: PrepareArgs) -> Result<ExitCode, DemoError> {
    let well = Well {
        offset: 0.0,
        k: a.a_k,
        shift: a.a_shift,
    };
    let sys = ToySystem::new(well, well, a.dimensions, a.temperature)?;
    let x = start::displaced(a.a_shift, sys.sigma(0.0), a.dimensions, a.displace);
    start::write(&a.output, &x)?;
    Ok(ExitCode::SUCCESS)
}

fn do_tables(a: TablesArgs) -> Result<ExitCode, DemoError> {
    let ligands = scenario::read_ligands(&a.ligands)?;
    let edges = scenario::read_edges(&a.edges)?;
    let t = scenario::exact_tables(&ligands, &edges, a.dimensions, a.temperature)?;
    std::fs::create_dir_all(&a.out_dir).map_err(|e| DemoError::io(&a.out_dir, e))?;
    let files = [
        ("exact.csv", t.edges_csv()),
        ("exact-ligands.csv", t.ligands_csv()),
        (
            "measured.csv",
            t.measured_csv(a.baseline, a.noise, a.noise_seed, a.temperature),
        ),
    ];
    for (name, text) in files {
        legwork::demo::checkpoint::write_atomic(&a.out_dir.join(name), text.as_bytes())?;
    }
    Ok(ExitCode::SUCCESS)
}

fn main() -> ExitCode {
    let result = match Cli::parse().command {
        Command::Run(a) => do_run(*a),
        Command::Prepare(a) => do_prepare(a),
        Command::Tables(a) => do_tables(a),
    };
    result.unwrap_or_else(|e| {
        eprintln!("legwork-demo-engine: error: {e}");
        ExitCode::from(if e.is_bad_input() { 2 } else { 1 })
    })
}
