//! The invented demo scenario: its ligand table, edge list and exact answers.
//!
//! `demo-data/ligands.csv` has one row per ligand with the engine parameters of both
//! environments (columns `id`, `complex_offset`, `complex_k`, `complex_shift`,
//! `solvent_offset`, `solvent_k`, `solvent_shift`; kcal/mol, kcal/mol/Å², Å). An edge
//! A → B runs, in each environment, the toy system whose end state A is ligand A's
//! well and end state B is ligand B's. Hence
//! ΔΔG_bind(A → B) = ΔG_complex(A → B) − ΔG_solvent(A → B) = G_B − G_A with
//! G_L = c_L^complex − c_L^solvent + (d/2) kT ln(k_L^complex / k_L^solvent).

use super::system::{ToySystem, Well};
use super::DemoError;
use crate::units::GAS_CONSTANT_KJ;
use crate::units::KJ_PER_KCAL;
use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;
use rand_distr::{Distribution, Normal};
use serde::Deserialize;
use std::fmt::Write;
use std::path::Path;

/// The two environments of the demo: bound to the target, and free in water.
pub const ENVIRONMENTS: [&str; 2] = ["complex", "solvent"];

/// One ligand's engine parameters.
#[derive(Debug, Clone, PartialEq)]
pub struct Ligand {
    /// the ligand id (e.g. `ork-01`)
    pub id: String,
    /// its well in the complex (bound) environment
    pub complex: Well,
    /// its well in the solvent (unbound) environment
    pub solvent: Well,
}

impl Ligand {
    /// The well in `environment` (`complex` or `solvent`).
    pub fn well(&self, environment: &str) -> Option<Well> {
        match environment {
            "complex" => Some(self.complex),
            "solvent" => Some(self.solvent),
            _ => None,
        }
    }
}

#[derive(Deserialize)]
struct LigandRow {
    id: String,
    complex_offset: f64,
    complex_k: f64,
    complex_shift: f64,
    solvent_offset: f64,
    solvent_k: f64,
    solvent_shift: f64,
}

fn format_err(path: &Path, line: u64, message: impl Into<String>) -> DemoError {
    DemoError::Format {
        path: path.to_path_buf(),
        line,
        message: message.into(),
    }
}

/// Reads the ligand table.
pub fn read_ligands(path: &Path) -> Result<Vec<Ligand>, DemoError> {
    let mut rd = csv::ReaderBuilder::new()
        .comment(Some(b'#'))
        .trim(csv::Trim::All)
        .from_path(path)
        .map_err(|e| format_err(path, 0, e.to_string()))?;
    let mut out: Vec<Ligand> = Vec::new();
    for row in rd.deserialize::<LigandRow>() {
        let row = row.map_err(|e| {
            let line = e.position().map(|p| p.line()).unwrap_or(0);
            format_err(path, line, format!("{e}; expected columns id,complex_offset,complex_k,complex_shift,solvent_offset,solvent_k,solvent_shift"))
        })?;
        if out.iter().any(|l| l.id == row.id) {
            return Err(format_err(
                path,
                0,
                format!("ligand '{}' is listed twice", row.id),
            ));
        }
        out.push(Ligand {
            id: row.id,
            complex: Well {
                offset: row.complex_offset,
                k: row.complex_k,
                shift: row.complex_shift,
            },
            solvent: Well {
                offset: row.solvent_offset,
                k: row.solvent_k,
                shift: row.solvent_shift,
            },
        });
    }
    Ok(out)
}

#[derive(Deserialize)]
#[serde(untagged)]
enum EdgeEntry {
    Pair([String; 2]),
    Map { a: String, b: String },
}

#[derive(Deserialize)]
struct CampaignEdges {
    edges: Vec<EdgeEntry>,
}

/// Reads an edge list: a CSV with header `a,b`, or the `edges:` list of a campaign
/// file (`.yaml`/`.yml`; entries `[a, b]` or `{a, b, …}`).
pub fn read_edges(path: &Path) -> Result<Vec<(String, String)>, DemoError> {
    let is_yaml = matches!(
        path.extension().and_then(|e| e.to_str()),
        Some("yaml" | "yml")
    );
    if is_yaml {
        let text = std::fs::read_to_string(path).map_err(|e| DemoError::io(path, e))?;
        let c: CampaignEdges = crate::campaign::yaml::parse(&text)
            .map_err(|e| (e.pos, e.message))
            .and_then(|root| {
                crate::campaign::de::from_node(&root, "the campaign file")
                    .map_err(|e| (e.pos.unwrap_or(root.pos), e.message()))
            })
            .map_err(|(pos, msg)| {
                format_err(
                    path,
                    pos.line as u64,
                    format!("cannot read the edges list: {msg}"),
                )
            })?;
        return Ok(c
            .edges
            .into_iter()
            .map(|e| match e {
                EdgeEntry::Pair([a, b]) | EdgeEntry::Map { a, b } => (a, b),
            })
            .collect());
    }
    #[derive(Deserialize)]
    struct Row {
        a: String,
        b: String,
    }
    let mut rd = csv::ReaderBuilder::new()
        .comment(Some(b'#'))
        .trim(csv::Trim::All)
        .from_path(path)
        .map_err(|e| format_err(path, 0, e.to_string()))?;
    rd.deserialize::<Row>()
        .map(|r| {
            r.map(|r| (r.a, r.b)).map_err(|e| {
                format_err(
                    path,
                    e.position().map(|p| p.line()).unwrap_or(0),
                    format!("{e}; expected a header a,b"),
                )
            })
        })
        .collect()
}

/// The exact answers of a scenario at one temperature and dimension count.
#[derive(Debug, Clone, PartialEq)]
pub struct ExactTables {
    /// per edge: (a, b, ΔΔG_bind in kcal/mol), in edge-list order
    pub edges: Vec<(String, String, f64)>,
    /// per ligand: (id, G_L − mean over the series, kcal/mol), in table order
    pub ligands: Vec<(String, f64)>,
}

/// Computes every edge's ΔΔG through the engine's own [`ToySystem::delta_g`] and every
/// ligand's ΔG relative to the series mean.
pub fn exact_tables(
    ligands: &[Ligand],
    edges: &[(String, String)],
    dimensions: usize,
    temperature_k: f64,
) -> Result<ExactTables, DemoError> {
    let find = |id: &str| {
        ligands.iter().find(|l| l.id == id).ok_or_else(|| {
            DemoError::parameter(
                "edges",
                format!("edge names ligand '{id}', which the ligand table does not have"),
            )
        })
    };
    let leg = |a: &Ligand, b: &Ligand, env: &str| -> Result<f64, DemoError> {
        Ok(ToySystem::new(
            a.well(env).unwrap(),
            b.well(env).unwrap(),
            dimensions,
            temperature_k,
        )?
        .delta_g())
    };
    let mut out_edges = Vec::new();
    for (a, b) in edges {
        let (la, lb) = (find(a)?, find(b)?);
        out_edges.push((
            a.clone(),
            b.clone(),
            leg(la, lb, "complex")? - leg(la, lb, "solvent")?,
        ));
    }
    // G_L relative to ligand 0 is the ΔΔG of the edge 0 → L, again via the engine's ΔG.
    let first = ligands
        .first()
        .ok_or_else(|| DemoError::parameter("ligands", "the ligand table is empty"))?;
    let mut g = Vec::new();
    for l in ligands {
        g.push(leg(first, l, "complex")? - leg(first, l, "solvent")?);
    }
    let mean = g.iter().sum::<f64>() / g.len() as f64;
    let out_ligands = ligands
        .iter()
        .zip(&g)
        .map(|(l, v)| (l.id.clone(), v - mean))
        .collect();
    Ok(ExactTables {
        edges: out_edges,
        ligands: out_ligands,
    })
}

impl ExactTables {
    /// `exact.csv`: `ligand_a,ligand_b,ddg_exact` (kcal/mol, 6 decimals).
    pub fn edges_csv(&self) -> String {
        let mut s = String::from("ligand_a,ligand_b,ddg_exact\n");
        for (a, b, v) in &self.edges {
            let _ = writeln!(s, "{a},{b},{v:.6}");
        }
        s
    }

    /// `exact-ligands.csv`: `ligand,dg_exact` (kcal/mol relative to the series mean, 6 decimals).
    pub fn ligands_csv(&self) -> String {
        let mut s = String::from("ligand,dg_exact\n");
        for (id, v) in &self.ligands {
            let _ = writeln!(s, "{id},{v:.6}");
        }
        s
    }

    /// `measured.csv` (the format of README, "Results and the report"): invented "measurements": the exact ΔG shifted to a
    /// plausible absolute level `baseline` (kcal/mol), plus normal noise of standard
    /// deviation `noise` drawn from `seed`; every other ligand is given as a Ki in nM
    /// (ΔG = RT ln(Ki / 1 M)) at `temperature_k`.
    pub fn measured_csv(&self, baseline: f64, noise: f64, seed: u64, temperature_k: f64) -> String {
        let rt = GAS_CONSTANT_KJ * temperature_k / KJ_PER_KCAL;
        let mut rng = ChaCha8Rng::seed_from_u64(seed);
        let normal = Normal::new(0.0, noise).expect("noise is a finite standard deviation");
        let mut s = String::from(
            "# INVENTED DATA: not measurements. The demo scenario (fictional target \"Orrin kinase\",\n\
             # fictional ligands ork-01 … ork-08) is made up; these values are the exact answers\n",
        );
        let _ = writeln!(
            s,
            "# shifted to {baseline} kcal/mol plus invented noise (sd {noise} kcal/mol, seed {seed}), written by\n\
             # `legwork-demo-engine tables`. Ki rows: ΔG = RT ln(Ki / 1 M) at {temperature_k} K."
        );
        s.push_str("ligand,kind,value,unit\n");
        for (i, (id, v)) in self.ligands.iter().enumerate() {
            let dg = baseline + v + normal.sample(&mut rng);
            if i % 2 == 1 {
                let ki_nm = (dg / rt).exp() * 1e9;
                let _ = writeln!(s, "{id},ki,{},nM", three_significant(ki_nm));
            } else {
                let _ = writeln!(s, "{id},dg,{dg:.2},kcal/mol");
            }
        }
        s
    }
}

fn three_significant(x: f64) -> String {
    let digits = (2 - x.abs().log10().floor() as i32).max(0) as usize;
    format!("{x:.digits$}")
}
