//! One window: from a start (or a checkpoint) to the last frame, writing the window table.

use super::checkpoint::{Checkpoint, FORMAT};
use super::fault::{FaultAction, Faults};
use super::sampler::Ar1Sampler;
use super::{table, DemoError, ToySystem};
use crate::units::EnergyUnit;
use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;
use serde::Serialize;
use sha2::{Digest, Sha256};
use std::fs::{File, OpenOptions};
use std::io::{BufWriter, Seek, SeekFrom, Write};
use std::path::PathBuf;

/// Everything one production run needs.
#[derive(Debug, Clone)]
pub struct RunConfig {
    /// the leg's two end states, temperature and dimensions
    pub system: ToySystem,
    /// temperature in kelvin (also sets the system's kT)
    pub temperature_k: f64,
    /// λ of every state of the leg, in index order
    pub lambdas: Vec<f64>,
    /// index of the state this window samples
    pub state: usize,
    /// frames the finished table holds
    pub frames: u64,
    /// seed of the sampling stream
    pub seed: u64,
    /// attempt number (from 1); only faults depend on it
    pub attempt: u32,
    /// unit of the energies written
    pub unit: EnergyUnit,
    /// AR(1) coefficient per frame, 0 ≤ φ < 1
    pub phi: f64,
    /// time between frames (ps), written in the `time` column
    pub time_step: f64,
    /// the starting configuration; `None`: the state's centre displaced by `displace` widths per axis
    pub start: Option<Vec<f64>>,
    /// displacement of the default start, in thermal widths per coordinate
    pub displace: f64,
    /// the window table to write
    pub output: PathBuf,
    /// the checkpoint file; `None` disables checkpoints
    pub checkpoint: Option<PathBuf>,
    /// frames between checkpoints (and flushes)
    pub checkpoint_every: u64,
    /// injected failures
    pub faults: Faults,
}

/// How a run ended (errors aside).
#[derive(Debug, Clone, PartialEq)]
pub enum RunOutcome {
    /// every frame is written
    Completed {
        /// frames written by this process
        written: u64,
        /// the checkpoint frame it resumed from, if it did
        resumed_from: Option<u64>,
        /// things the user should know (e.g. a checkpoint that could not be used)
        notes: Vec<String>,
    },
    /// an injected fault fired; the caller performs the action
    Fault {
        /// what to do now
        action: FaultAction,
        /// frames written by this process before it fired
        written: u64,
        /// the checkpoint frame it resumed from, if it did
        resumed_from: Option<u64>,
    },
}

impl RunConfig {
    fn validate(&self) -> Result<(), DemoError> {
        if self.lambdas.is_empty() {
            return Err(DemoError::parameter(
                "lambdas",
                "give the λ of every state of the leg",
            ));
        }
        if let Some(l) = self.lambdas.iter().find(|l| !(0.0..=1.0).contains(*l)) {
            return Err(DemoError::parameter(
                "lambdas",
                format!("λ = {l} is outside [0, 1]"),
            ));
        }
        if self.state >= self.lambdas.len() {
            return Err(DemoError::parameter(
                "state",
                format!(
                    "state {} does not exist: the leg has {} states (0..{})",
                    self.state,
                    self.lambdas.len(),
                    self.lambdas.len() - 1
                ),
            ));
        }
        if !(0.0..1.0).contains(&self.phi) {
            return Err(DemoError::parameter(
                "phi",
                format!("must be in [0, 1), got {}", self.phi),
            ));
        }
        if self.frames == 0 {
            return Err(DemoError::parameter("frames", "must be at least 1"));
        }
        if self.checkpoint_every == 0 {
            return Err(DemoError::parameter(
                "checkpoint-every",
                "must be at least 1",
            ));
        }
        if !(self.time_step.is_finite() && self.time_step > 0.0) {
            return Err(DemoError::parameter(
                "time-step",
                "must be a positive number",
            ));
        }
        if !(0.0..=1.0).contains(&self.faults.fail_probability) {
            return Err(DemoError::parameter(
                "fault-fail-probability",
                "must be in [0, 1]",
            ));
        }
        if let Some(s) = &self.start {
            if s.len() != self.system.dimensions {
                return Err(DemoError::parameter(
                    "start",
                    "the starting configuration has the wrong number of coordinates",
                ));
            }
        }
        Ok(())
    }

    /// The configuration the run starts from.
    pub fn start_position(&self) -> Vec<f64> {
        match &self.start {
            Some(s) => s.clone(),
            None => {
                let lam = self.lambdas[self.state];
                let s = &self.system;
                super::start::displaced(s.center(lam), s.sigma(lam), s.dimensions, self.displace)
            }
        }
    }

    /// SHA-256 of every parameter that shapes the output's bytes (not the frame count,
    /// so a finished window can be extended; not the attempt, faults or checkpointing).
    pub fn fingerprint(&self) -> String {
        let s = &self.system;
        let mut h = Sha256::new();
        let mut f = |x: f64| h.update(x.to_bits().to_le_bytes());
        for w in [&s.a, &s.b] {
            f(w.offset);
            f(w.k);
            f(w.shift);
        }
        f(self.temperature_k);
        f(self.phi);
        f(self.time_step);
        for l in &self.lambdas {
            f(*l);
        }
        for x in self.start_position() {
            f(x);
        }
        h.update((s.dimensions as u64).to_le_bytes());
        h.update((self.state as u64).to_le_bytes());
        h.update((self.lambdas.len() as u64).to_le_bytes());
        h.update(self.seed.to_le_bytes());
        h.update(self.unit.as_str().as_bytes());
        h.finalize().iter().map(|b| format!("{b:02x}")).collect()
    }
}

struct Output {
    w: BufWriter<File>,
    bytes: u64,
}

impl Output {
    fn write(&mut self, path: &std::path::Path, data: &[u8]) -> Result<(), DemoError> {
        self.w.write_all(data).map_err(|e| DemoError::io(path, e))?;
        self.bytes += data.len() as u64;
        Ok(())
    }
    fn flush(&mut self, path: &std::path::Path) -> Result<(), DemoError> {
        self.w.flush().map_err(|e| DemoError::io(path, e))
    }
}

/// The time of a frame, rounded to 1e-6 ps so that e.g. 3 × 0.1 prints as 0.3.
fn frame_time(frame: u64, time_step: f64) -> f64 {
    (frame as f64 * time_step * 1e6).round() / 1e6
}

/// Runs one window. Resumes from the checkpoint when one exists (and matches these
/// parameters); otherwise starts over and overwrites the output.
pub fn run(cfg: &RunConfig) -> Result<RunOutcome, DemoError> {
    cfg.validate()?;
    let fingerprint = cfg.fingerprint();
    let out_path = cfg.output.as_path();
    let mut notes = Vec::new();

    let resume = match &cfg.checkpoint {
        Some(p) => match Checkpoint::load(p).or_else(|e| match e {
            // Starting over gives the same bytes, so a damaged checkpoint costs only time.
            DemoError::Format { .. } => {
                notes.push(format!("{e}; starting the window over"));
                Ok(None)
            }
            other => Err(other),
        })? {
            Some(ck) => {
                if ck.fingerprint != fingerprint {
                    return Err(DemoError::CheckpointMismatch {
                        path: p.clone(),
                        detail: "fingerprint differs".into(),
                    });
                }
                if ck.frame > cfg.frames {
                    return Err(DemoError::parameter(
                        "frames",
                        format!("the checkpoint {} is at frame {} but --frames is {}; ask for at least as many frames", p.display(), ck.frame, cfg.frames),
                    ));
                }
                let len = std::fs::metadata(out_path).map(|m| m.len()).unwrap_or(0);
                if len < ck.output_bytes {
                    notes.push(format!(
                        "{} is shorter ({len} bytes) than its checkpoint says ({} bytes); starting the window over",
                        out_path.display(),
                        ck.output_bytes
                    ));
                    None
                } else {
                    Some(ck)
                }
            }
            None => None,
        },
        None => None,
    };

    let lam = cfg.lambdas[cfg.state];
    let sys = &cfg.system;
    let (start_frame, position, rng, mut out, resumed_from) = match resume {
        Some(ck) => {
            let mut f = OpenOptions::new()
                .write(true)
                .open(out_path)
                .map_err(|e| DemoError::io(out_path, e))?;
            f.set_len(ck.output_bytes)
                .map_err(|e| DemoError::io(out_path, e))?;
            f.seek(SeekFrom::End(0))
                .map_err(|e| DemoError::io(out_path, e))?;
            let mut rng = ChaCha8Rng::seed_from_u64(cfg.seed);
            rng.set_word_pos(ck.rng_word_pos.parse().expect("checked on load"));
            let out = Output {
                w: BufWriter::with_capacity(1 << 16, f),
                bytes: ck.output_bytes,
            };
            (ck.frame, ck.position(), rng, out, Some(ck.frame))
        }
        None => {
            let f = File::create(out_path).map_err(|e| DemoError::io(out_path, e))?;
            let mut out = Output {
                w: BufWriter::with_capacity(1 << 16, f),
                bytes: 0,
            };
            out.write(
                out_path,
                table::header(cfg.temperature_k, cfg.unit, cfg.state, &cfg.lambdas).as_bytes(),
            )?;
            (
                0,
                cfg.start_position(),
                ChaCha8Rng::seed_from_u64(cfg.seed),
                out,
                None,
            )
        }
    };

    let remaining = cfg.frames - start_frame;
    let plan = cfg.faults.plan(cfg.seed, cfg.attempt, remaining);
    let mut sampler = Ar1Sampler::new(sys.center(lam), sys.sigma(lam), cfg.phi, position, rng);
    let scale = EnergyUnit::KcalPerMol.factor_to(cfg.unit, cfg.temperature_k);
    let mut line = String::with_capacity(16 * (cfg.lambdas.len() + 2));

    let checkpoint =
        |out: &mut Output, sampler: &Ar1Sampler, frame: u64| -> Result<(), DemoError> {
            out.flush(out_path)?;
            if let Some(p) = &cfg.checkpoint {
                Checkpoint {
                    format: FORMAT.to_string(),
                    fingerprint: fingerprint.clone(),
                    frame,
                    output_bytes: out.bytes,
                    position_bits: sampler.position.iter().map(|x| x.to_bits()).collect(),
                    rng_word_pos: sampler.rng.get_word_pos().to_string(),
                }
                .save(p)?;
            }
            Ok(())
        };

    for frame in start_frame..cfg.frames {
        let written = frame - start_frame;
        if let Some((at, action)) = plan.stop {
            if written == at {
                out.flush(out_path)?;
                return Ok(RunOutcome::Fault {
                    action,
                    written,
                    resumed_from,
                });
            }
        }
        let ua = sys.a.energy(&sampler.position);
        let ub = sys.b.energy(&sampler.position);
        line.clear();
        table::push_row(
            &mut line,
            frame_time(frame, cfg.time_step),
            (ub - ua) * scale,
            cfg.lambdas
                .iter()
                .map(|l| ((1.0 - l) * ua + l * ub) * scale),
        );
        let last = frame + 1 == cfg.frames;
        if last && plan.truncate_last {
            out.write(out_path, &line.as_bytes()[..line.len() / 2])?;
            out.flush(out_path)?;
            return Ok(RunOutcome::Completed {
                written: written + 1,
                resumed_from,
                notes,
            });
        }
        out.write(out_path, line.as_bytes())?;
        sampler.step();
        if (frame + 1) % cfg.checkpoint_every == 0 || last {
            checkpoint(&mut out, &sampler, frame + 1)?;
        }
    }
    out.flush(out_path)?;
    if let Some((at, action)) = plan.stop {
        if at == remaining {
            return Ok(RunOutcome::Fault {
                action,
                written: remaining,
                resumed_from,
            });
        }
    }
    Ok(RunOutcome::Completed {
        written: remaining,
        resumed_from,
        notes,
    })
}

/// The analytic answers for one leg, as `--exact` prints them.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ExactReport {
    /// ΔG = F(1) − F(0) of the leg
    pub delta_g: f64,
    /// unit of every energy here
    pub unit: EnergyUnit,
    /// temperature in kelvin
    #[serde(rename = "temperature_K")]
    pub temperature_k: f64,
    /// dimensions of the toy system
    pub dimensions: usize,
    /// F(λ) at every state
    pub states: Vec<ExactState>,
}

/// F(λ) at one state.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ExactState {
    /// 0-based state index
    pub index: usize,
    /// λ of the state
    pub lambda: f64,
    /// F(λ) (absolute, same reference as the window table's energies)
    pub free_energy: f64,
    /// F(λ) − F(λ₀), relative to the first state
    pub relative: f64,
}

/// The exact ΔG of the leg and F at every λ in `lambdas`, in `unit`.
pub fn exact(
    system: &ToySystem,
    lambdas: &[f64],
    unit: EnergyUnit,
    temperature_k: f64,
) -> ExactReport {
    let c = |v: f64| EnergyUnit::KcalPerMol.convert(v, unit, temperature_k);
    let f0 = lambdas
        .first()
        .map(|l| system.free_energy(*l))
        .unwrap_or(0.0);
    ExactReport {
        delta_g: c(system.delta_g()),
        unit,
        temperature_k,
        dimensions: system.dimensions,
        states: lambdas
            .iter()
            .enumerate()
            .map(|(index, &lambda)| {
                let f = system.free_energy(lambda);
                ExactState {
                    index,
                    lambda,
                    free_energy: c(f),
                    relative: c(f - f0),
                }
            })
            .collect(),
    }
}
