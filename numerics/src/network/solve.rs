//! Weighted least squares over the network's edges.

use super::experiment::Measured;
use super::topology::{cycle_basis, hysteresis, CycleClosure, Hysteresis};
use crate::cycle::{EdgeFlag, EdgeResult};
use nalgebra::{DMatrix, DVector};
use serde::{Deserialize, Serialize};
use std::collections::BTreeMap;

/// One edge as the network sees it: ΔΔG = G(b) − G(a) ± σ.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct NetworkEdge {
    /// Ligand at λ = 0.
    pub a: String,
    /// Ligand at λ = 1.
    pub b: String,
    /// G(b) − G(a), in the campaign unit.
    pub ddg: f64,
    /// Its standard error (> 0).
    pub sigma: f64,
}

impl From<&EdgeResult> for NetworkEdge {
    fn from(e: &EdgeResult) -> Self {
        NetworkEdge {
            a: e.ligand_a.clone(),
            b: e.ligand_b.clone().unwrap_or_default(),
            ddg: e.ddg,
            sigma: e.sigma,
        }
    }
}

/// How the free additive constant of one connected component was fixed.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(tag = "by", rename_all = "snake_case")]
pub enum Offset {
    /// The mean of the component's ΔG equals the mean of its measured values.
    Measured {
        /// How many measured ligands the component has.
        count: usize,
    },
    /// The named reference ligand has ΔG = 0.
    Reference {
        /// The reference ligand.
        ligand: String,
    },
    /// The component's ΔG values average to zero.
    SeriesMean,
}

/// Per-ligand result of the network.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct LigandEstimate {
    /// Ligand id.
    pub ligand: String,
    /// ΔG, in the campaign unit (absolute only up to the component's [`Offset`]).
    pub dg: f64,
    /// Standard error from the covariance diagonal.
    pub sigma: f64,
    /// Measured ΔG in the campaign unit, when there is one.
    #[serde(default)]
    pub measured: Option<f64>,
    /// Connected component (0 for a connected network).
    #[serde(default)]
    pub component: usize,
}

/// One edge after the fit.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct EdgeFit {
    /// Ligand at λ = 0.
    pub a: String,
    /// Ligand at λ = 1.
    pub b: String,
    /// The edge's own ΔΔG.
    pub ddg: f64,
    /// Its σ.
    pub sigma: f64,
    /// G(b) − G(a) from the fit.
    pub fitted: f64,
    /// σ of `fitted` from the covariance.
    pub fitted_sigma: f64,
    /// ddg − fitted.
    pub residual: f64,
    /// |residual| > 2σ (σ of the edge).
    pub flagged: bool,
}

/// Everything the network solve produces.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct NetworkResult {
    /// Per-ligand ΔG, in order of first appearance on an edge.
    pub ligands: Vec<LigandEstimate>,
    /// Covariance of the ligand ΔG (row/column order of `ligands`); zero between components.
    pub covariance: Vec<Vec<f64>>,
    /// How each component's offset was fixed (index = component).
    pub offsets: Vec<Offset>,
    /// Each input edge after the fit, in input order.
    pub edges: Vec<EdgeFit>,
    /// Closure of every cycle of a cycle basis.
    pub cycles: Vec<CycleClosure>,
    /// Pairs run in both directions.
    pub hysteresis: Vec<Hysteresis>,
    /// Weighted sum of squared residuals.
    pub chi2: f64,
    /// Degrees of freedom: edges − ligands + components.
    pub dof: usize,
    /// Things a reader should know (disconnected network, unmatched measurements).
    pub warnings: Vec<String>,
}

/// Why the network could not be solved.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum NetworkError {
    /// No edges.
    #[error("the network has no edges with results; finish some edges first")]
    Empty,
    /// An edge goes from a ligand to itself.
    #[error("edge {index} ({a} → {a}) starts and ends at the same ligand; remove it")]
    SelfLoop {
        /// Edge position.
        index: usize,
        /// The ligand.
        a: String,
    },
    /// An edge's σ cannot be used as a weight.
    #[error("edge {a} → {b}: σ = {sigma} cannot weight the fit (needs a finite positive σ; a σ of 0 usually means a single frame or a failed estimate)")]
    BadSigma {
        /// Ligand a.
        a: String,
        /// Ligand b.
        b: String,
        /// The σ.
        sigma: f64,
    },
    /// The reference ligand is not on any edge.
    #[error("reference ligand '{0}' is on no edge with results; name a ligand of the network")]
    UnknownReference(String),
}

/// Solves for per-ligand ΔG by weighted least squares.
///
/// Minimises Σₑ (G(bₑ) − G(aₑ) − ΔΔGₑ)² / σₑ², the maximum-likelihood estimate for
/// independent Gaussian edge errors. Differences are fixed by the edges; the
/// additive constant of each connected component is set by, in order of
/// preference: the mean of the component's measured values (`measured`, in the
/// campaign unit), the `reference` ligand at ΔG = 0, or a zero series mean.
/// The covariance is the inverse of the normal matrix with one ligand per
/// component held fixed, then carried through the offset: for an offset
/// G′ = (I − 1cᵀ) G + const, Cov′ = (I − 1cᵀ) Cov (I − 1cᵀ)ᵀ. Measured values
/// enter only through that constant; their own errors are not propagated.
pub fn solve(
    edges: &[NetworkEdge],
    measured: &[Measured],
    reference: Option<&str>,
) -> Result<NetworkResult, NetworkError> {
    if edges.is_empty() {
        return Err(NetworkError::Empty);
    }
    let mut names: Vec<String> = Vec::new();
    let mut index: BTreeMap<&str, usize> = BTreeMap::new();
    for (i, e) in edges.iter().enumerate() {
        if e.a == e.b {
            return Err(NetworkError::SelfLoop {
                index: i,
                a: e.a.clone(),
            });
        }
        if !(e.sigma.is_finite() && e.sigma > 0.0 && e.ddg.is_finite()) {
            return Err(NetworkError::BadSigma {
                a: e.a.clone(),
                b: e.b.clone(),
                sigma: e.sigma,
            });
        }
        for l in [&e.a, &e.b] {
            if !index.contains_key(l.as_str()) {
                index.insert(l.as_str(), names.len());
                names.push(l.clone());
            }
        }
    }
    if let Some(r) = reference {
        if !index.contains_key(r) {
            return Err(NetworkError::UnknownReference(r.to_string()));
        }
    }
    let n = names.len();
    let edge_idx: Vec<(usize, usize, f64, f64)> = edges
        .iter()
        .map(|e| {
            (
                index[e.a.as_str()],
                index[e.b.as_str()],
                e.ddg,
                1.0 / (e.sigma * e.sigma),
            )
        })
        .collect();

    let component = components(n, &edge_idx);
    let n_comp = component.iter().copied().max().map_or(0, |m| m + 1);
    let mut measured_of: BTreeMap<&str, f64> = BTreeMap::new();
    for m in measured {
        measured_of.insert(m.ligand.as_str(), m.dg);
    }
    let mut warnings = Vec::new();
    if n_comp > 1 {
        warnings.push(format!(
            "the network falls into {n_comp} disconnected parts; ΔG values from different parts are not comparable unless each part has measured ligands"
        ));
    }
    let unmatched: Vec<&str> = measured
        .iter()
        .map(|m| m.ligand.as_str())
        .filter(|l| !index.contains_key(l))
        .collect();
    if !unmatched.is_empty() {
        warnings.push(format!(
            "measured ligands not in the network (ignored for the offset): {}",
            unmatched.join(", ")
        ));
    }

    let mut g = DVector::<f64>::zeros(n);
    let mut cov = DMatrix::<f64>::zeros(n, n);
    let mut offsets = Vec::with_capacity(n_comp);
    for c in 0..n_comp {
        let members: Vec<usize> = (0..n).filter(|&i| component[i] == c).collect();
        let local: BTreeMap<usize, usize> =
            members.iter().enumerate().map(|(k, &i)| (i, k)).collect();
        let m = members.len();
        // Normal equations Lg = r of the weighted design (L: weighted graph Laplacian).
        let mut lap = DMatrix::<f64>::zeros(m, m);
        let mut rhs = DVector::<f64>::zeros(m);
        for &(a, b, d, w) in edge_idx.iter().filter(|e| component[e.0] == c) {
            let (a, b) = (local[&a], local[&b]);
            lap[(a, a)] += w;
            lap[(b, b)] += w;
            lap[(a, b)] -= w;
            lap[(b, a)] -= w;
            rhs[a] -= w * d;
            rhs[b] += w * d;
        }
        // Hold the first member at 0; the reduced Laplacian of a connected graph is
        // positive definite, so Cholesky applies.
        let red = lap.view((1, 1), (m - 1, m - 1)).into_owned();
        let red_inv = red
            .cholesky()
            .expect("reduced Laplacian of a connected component is positive definite")
            .inverse();
        let x = &red_inv * rhs.rows(1, m - 1);
        let mut g0 = DVector::<f64>::zeros(m);
        g0.rows_mut(1, m - 1).copy_from(&x);
        let mut c0 = DMatrix::<f64>::zeros(m, m);
        c0.view_mut((1, 1), (m - 1, m - 1)).copy_from(&red_inv);

        let meas: Vec<(usize, f64)> = members
            .iter()
            .enumerate()
            .filter_map(|(k, &i)| measured_of.get(names[i].as_str()).map(|&v| (k, v)))
            .collect();
        let mut weights = DVector::<f64>::zeros(m);
        let target;
        let reference_here = reference.and_then(|r| {
            let i = index[r];
            (component[i] == c).then(|| local[&i])
        });
        if !meas.is_empty() {
            for &(k, _) in &meas {
                weights[k] = 1.0 / meas.len() as f64;
            }
            target = meas.iter().map(|m| m.1).sum::<f64>() / meas.len() as f64;
            offsets.push(Offset::Measured { count: meas.len() });
        } else if let Some(k) = reference_here {
            weights[k] = 1.0;
            target = 0.0;
            offsets.push(Offset::Reference {
                ligand: names[members[k]].clone(),
            });
        } else {
            weights.fill(1.0 / m as f64);
            target = 0.0;
            offsets.push(Offset::SeriesMean);
        }
        let shift = target - weights.dot(&g0);
        let p = DMatrix::<f64>::identity(m, m)
            - DMatrix::<f64>::from_element(m, 1, 1.0) * weights.transpose();
        let cp = &p * c0 * p.transpose();
        for (k, &i) in members.iter().enumerate() {
            g[i] = g0[k] + shift;
            for (l, &j) in members.iter().enumerate() {
                cov[(i, j)] = cp[(k, l)];
            }
        }
    }

    let mut chi2 = 0.0;
    let fits: Vec<EdgeFit> = edges
        .iter()
        .zip(&edge_idx)
        .map(|(e, &(a, b, _, w))| {
            let fitted = g[b] - g[a];
            let residual = e.ddg - fitted;
            chi2 += w * residual * residual;
            let var = (cov[(a, a)] + cov[(b, b)] - 2.0 * cov[(a, b)]).max(0.0);
            EdgeFit {
                a: e.a.clone(),
                b: e.b.clone(),
                ddg: e.ddg,
                sigma: e.sigma,
                fitted,
                fitted_sigma: var.sqrt(),
                residual,
                flagged: residual.abs() > 2.0 * e.sigma,
            }
        })
        .collect();
    let ligands = (0..n)
        .map(|i| LigandEstimate {
            ligand: names[i].clone(),
            dg: g[i],
            sigma: cov[(i, i)].max(0.0).sqrt(),
            measured: measured_of.get(names[i].as_str()).copied(),
            component: component[i],
        })
        .collect();
    Ok(NetworkResult {
        ligands,
        covariance: (0..n)
            .map(|i| (0..n).map(|j| cov[(i, j)]).collect())
            .collect(),
        offsets,
        cycles: cycle_basis(edges, &names, &index),
        hysteresis: hysteresis(edges, &names, &index),
        edges: fits,
        chi2,
        dof: edges.len() + n_comp - n,
        warnings,
    })
}

/// Connected component of every ligand, numbered in order of first appearance.
fn components(n: usize, edges: &[(usize, usize, f64, f64)]) -> Vec<usize> {
    let mut parent: Vec<usize> = (0..n).collect();
    fn find(p: &mut [usize], mut x: usize) -> usize {
        while p[x] != x {
            p[x] = p[p[x]];
            x = p[x];
        }
        x
    }
    for &(a, b, _, _) in edges {
        let (ra, rb) = (find(&mut parent, a), find(&mut parent, b));
        if ra != rb {
            parent[ra.max(rb)] = ra.min(rb);
        }
    }
    let mut label: BTreeMap<usize, usize> = BTreeMap::new();
    (0..n)
        .map(|i| {
            let r = find(&mut parent, i);
            let next = label.len();
            *label.entry(r).or_insert(next)
        })
        .collect()
}

/// Copies the network's fit onto the edge results (fitted value, residual) and
/// adds the residual, closure and hysteresis flags. Edges are matched by their
/// ligand pair; `edges` and `fit` normally come from the same list in the same order.
pub fn annotate_edges(edges: &mut [EdgeResult], fit: &NetworkResult) {
    for (i, e) in edges.iter_mut().enumerate() {
        let Some(b) = e.ligand_b.as_deref() else {
            continue;
        };
        let found = fit
            .edges
            .get(i)
            .filter(|f| f.a == e.ligand_a && f.b == b && f.ddg == e.ddg)
            .or_else(|| {
                let same = |f: &&EdgeFit| f.a == e.ligand_a && f.b == b;
                let mut it = fit.edges.iter().filter(same);
                fit.edges
                    .iter()
                    .filter(same)
                    .find(|f| f.ddg == e.ddg)
                    .or_else(|| it.next())
            });
        if let Some(f) = found {
            e.fitted = Some(f.fitted);
            e.residual = Some(f.residual);
            if f.flagged {
                e.flags.push(EdgeFlag::Residual);
            }
        }
        let pair = |x: &str, y: &str| (x == e.ligand_a && y == b) || (y == e.ligand_a && x == b);
        if fit.hysteresis.iter().any(|h| h.flagged && pair(&h.a, &h.b)) {
            e.flags.push(EdgeFlag::Hysteresis);
        }
        let in_flagged_cycle = fit.cycles.iter().filter(|c| c.flagged).any(|c| {
            let k = c.ligands.len();
            (0..k).any(|j| pair(&c.ligands[j], &c.ligands[(j + 1) % k]))
        });
        if in_flagged_cycle {
            e.flags.push(EdgeFlag::Closure);
        }
        e.flags.sort();
        e.flags.dedup();
    }
}
