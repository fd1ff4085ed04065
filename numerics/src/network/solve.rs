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

/// Why a ligand's σ is zero by construction: its ΔG is what fixes its
/// connected part's free constant.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Anchor {
    /// The only measured ligand of its part: its ΔG equals its measurement, so
    /// it cannot be scored against it.
    Measured,
    /// The reference ligand (ΔG = 0).
    Reference,
}

/// Per-ligand result of the network.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct LigandEstimate {
    /// Ligand id.
    pub ligand: String,
    /// ΔG, in the unit of the edges (absolute only up to the component's [`Offset`]).
    pub dg: f64,
    /// Standard error from the covariance diagonal: relative to the anchor when
    /// the part has one, and 0 for the anchor itself (see `anchor`).
    pub sigma: f64,
    /// Measured ΔG in the unit of the edges, when there is one.
    #[serde(default)]
    pub measured: Option<f64>,
    /// Connected component (0 for a connected network).
    #[serde(default)]
    pub component: usize,
    /// Set when this ligand's ΔG fixes its part's offset, so its σ of 0 is a
    /// definition, not a precision: show it as the reference, not as ± 0.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub anchor: Option<Anchor>,
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

/// An edge as indices into the ligand list: (a, b, ΔΔG, weight 1/σ²).
type IndexedEdge = (usize, usize, f64, f64);

/// Solves for per-ligand ΔG by weighted least squares.
///
/// Minimises Σₑ (G(bₑ) − G(aₑ) − ΔΔGₑ)² / σₑ², the maximum-likelihood estimate for
/// independent Gaussian edge errors. Every edge is its own observation (an edge
/// run both ways contributes both runs). Differences are fixed by the edges; the
/// additive constant of each connected component is set by, in order of
/// preference: the mean of the component's measured values (`measured`, in the
/// unit of the edges), the `reference` ligand at ΔG = 0, or a zero series mean.
/// The covariance is the inverse of the normal matrix with one ligand per
/// component held fixed, then carried through the offset: for an offset
/// G′ = (I − 1cᵀ) G + const, Cov′ = (I − 1cᵀ) Cov (I − 1cᵀ)ᵀ. Measured values
/// enter only through that constant; their own errors are not propagated. A
/// ligand that alone fixes the constant (the one measured ligand of its part,
/// or the reference) has σ = 0 by construction and is marked with its
/// [`Anchor`]; the others' σ are then relative to it.
///
/// # Errors
///
/// [`NetworkError::Empty`] without edges, [`NetworkError::SelfLoop`] for an edge
/// from a ligand to itself, [`NetworkError::BadSigma`] for a σ that is not
/// finite and positive (or a non-finite ΔΔG), [`NetworkError::UnknownReference`]
/// when `reference` is on no edge.
///
/// ```
/// use legwork_numerics::network::{solve, NetworkEdge};
/// let e = |a: &str, b: &str, ddg| NetworkEdge { a: a.into(), b: b.into(), ddg, sigma: 0.1 };
/// // A closed triangle: the fit spreads the 0.3 closure error over its edges.
/// let fit = solve(&[e("x", "y", 1.0), e("y", "z", 1.0), e("x", "z", 2.3)], &[], Some("x"))?;
/// let g: Vec<f64> = fit.ligands.iter().map(|l| l.dg).collect();
/// assert!((g[1] - 1.1).abs() < 1e-12 && (g[2] - 2.2).abs() < 1e-12);
/// assert_eq!(fit.dof, 1);
/// # Ok::<(), legwork_numerics::network::NetworkError>(())
/// ```
pub fn solve(
    edges: &[NetworkEdge],
    measured: &[Measured],
    reference: Option<&str>,
) -> Result<NetworkResult, NetworkError> {
    let (names, index) = index_ligands(edges)?;
    if let Some(r) = reference {
        if !index.contains_key(r) {
            return Err(NetworkError::UnknownReference(r.to_string()));
        }
    }
    let n = names.len();
    let edge_idx: Vec<IndexedEdge> = edges
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
    let measured_of: BTreeMap<&str, f64> =
        measured.iter().map(|m| (m.ligand.as_str(), m.dg)).collect();
    let warnings = network_warnings(n_comp, measured, &index);

    let mut g = DVector::<f64>::zeros(n);
    let mut cov = DMatrix::<f64>::zeros(n, n);
    let mut offsets = Vec::with_capacity(n_comp);
    let mut anchors: Vec<Option<Anchor>> = vec![None; n];
    for c in 0..n_comp {
        let members: Vec<usize> = (0..n).filter(|&i| component[i] == c).collect();
        let reference_here = reference.map(|r| index[r]).filter(|&i| component[i] == c);
        let fit = solve_component(&members, &edge_idx, &names, &measured_of, reference_here);
        for (k, &i) in members.iter().enumerate() {
            g[i] = fit.g[k];
            for (l, &j) in members.iter().enumerate() {
                cov[(i, j)] = fit.cov[(k, l)];
            }
        }
        if let Some((i, a)) = fit.anchor {
            anchors[i] = Some(a);
        }
        offsets.push(fit.offset);
    }

    let (fits, chi2) = fit_edges(edges, &edge_idx, &g, &cov);
    let ligands = (0..n)
        .map(|i| LigandEstimate {
            ligand: names[i].clone(),
            dg: g[i],
            sigma: cov[(i, i)].max(0.0).sqrt(),
            measured: measured_of.get(names[i].as_str()).copied(),
            component: component[i],
            anchor: anchors[i],
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

/// Checks every edge and numbers the ligands in order of first appearance.
fn index_ligands(
    edges: &[NetworkEdge],
) -> Result<(Vec<String>, BTreeMap<&str, usize>), NetworkError> {
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
    Ok((names, index))
}

/// Warnings about the network as a whole: disconnected parts, measured ligands
/// on no edge.
fn network_warnings(
    n_comp: usize,
    measured: &[Measured],
    index: &BTreeMap<&str, usize>,
) -> Vec<String> {
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
    warnings
}

/// One connected component solved: ΔG and covariance of its members (in the
/// order given), how its offset was fixed, and its anchor (global index).
struct ComponentFit {
    g: DVector<f64>,
    cov: DMatrix<f64>,
    offset: Offset,
    anchor: Option<(usize, Anchor)>,
}

/// Solves the normal equations of one connected component and fixes its offset.
fn solve_component(
    members: &[usize],
    edge_idx: &[IndexedEdge],
    names: &[String],
    measured_of: &BTreeMap<&str, f64>,
    reference: Option<usize>,
) -> ComponentFit {
    let local: BTreeMap<usize, usize> = members.iter().enumerate().map(|(k, &i)| (i, k)).collect();
    let m = members.len();
    // Normal equations Lg = r of the weighted design (L: weighted graph Laplacian).
    let mut lap = DMatrix::<f64>::zeros(m, m);
    let mut rhs = DVector::<f64>::zeros(m);
    for &(a, b, d, w) in edge_idx.iter().filter(|e| local.contains_key(&e.0)) {
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
    let (target, offset, anchor) = if !meas.is_empty() {
        for &(k, _) in &meas {
            weights[k] = 1.0 / meas.len() as f64;
        }
        let anchor = (meas.len() == 1).then(|| (members[meas[0].0], Anchor::Measured));
        let target = meas.iter().map(|m| m.1).sum::<f64>() / meas.len() as f64;
        (target, Offset::Measured { count: meas.len() }, anchor)
    } else if let Some(i) = reference {
        weights[local[&i]] = 1.0;
        let offset = Offset::Reference {
            ligand: names[i].clone(),
        };
        (0.0, offset, Some((i, Anchor::Reference)))
    } else {
        weights.fill(1.0 / m as f64);
        (0.0, Offset::SeriesMean, None)
    };
    let shift = target - weights.dot(&g0);
    let p = DMatrix::<f64>::identity(m, m)
        - DMatrix::<f64>::from_element(m, 1, 1.0) * weights.transpose();
    let mut g = g0;
    g.add_scalar_mut(shift);
    ComponentFit {
        g,
        cov: &p * c0 * p.transpose(),
        offset,
        anchor,
    }
}

/// Each edge against the fit, and the weighted sum of squared residuals.
fn fit_edges(
    edges: &[NetworkEdge],
    edge_idx: &[IndexedEdge],
    g: &DVector<f64>,
    cov: &DMatrix<f64>,
) -> (Vec<EdgeFit>, f64) {
    let mut chi2 = 0.0;
    let fits = edges
        .iter()
        .zip(edge_idx)
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
    (fits, chi2)
}

/// Connected component of every ligand, numbered in order of first appearance.
fn components(n: usize, edges: &[IndexedEdge]) -> Vec<usize> {
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
///
/// ```
/// use legwork_numerics::cycle::{combine_edge, EdgeFlag, LegSpec, LegValue, Subject};
/// use legwork_numerics::network::{annotate_edges, solve, NetworkEdge};
/// use legwork_numerics::units::EnergyUnit;
/// let leg = [LegSpec { name: "l".into(), sign: 1.0, correction: 0.0, restraint: None }];
/// let close = |a: &str, b: &str, dg| {
///     let v = [LegValue { leg: "l".into(), replica: 1, dg, sigma: 0.1 }];
///     let s = Subject::Edge { a: a.into(), b: b.into() };
///     combine_edge(&s, &leg, &v, 298.15, EnergyUnit::KcalPerMol)
/// };
/// // A triangle that misses closure by 1.0 (10σ).
/// let mut edges = vec![close("x", "y", 1.0)?, close("y", "z", 1.0)?, close("x", "z", 3.0)?];
/// let net: Vec<NetworkEdge> = edges.iter().map(NetworkEdge::from).collect();
/// let fit = solve(&net, &[], None)?;
/// annotate_edges(&mut edges, &fit);
/// assert!(edges.iter().all(|e| e.residual.is_some() && e.flags.contains(&EdgeFlag::Closure)));
/// # Ok::<(), Box<dyn std::error::Error>>(())
/// ```
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
