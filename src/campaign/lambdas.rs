//! λ schedules: how a leg's states are spaced, for one λ or several components.

use serde::Serialize;

/// The λ states of a leg: one or more named components, each with one value per
/// state (aligned lists).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct LambdaSchedule {
    /// Component names in file order; a single-component leg has `lambda`.
    pub components: Vec<String>,
    /// `values[c][k]`: component `c` at state `k`.
    pub values: Vec<Vec<f64>>,
}

/// How `{count, spacing}` places the states.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Spacing {
    /// Evenly spaced.
    Linear,
    /// Denser near 0 and 1, where dU/dλ usually changes fastest:
    /// λ_k = (1 − cos(π k/(K−1)))/2.
    Ends,
}

impl LambdaSchedule {
    /// A single-component schedule from explicit values.
    pub fn single(values: Vec<f64>) -> Self {
        LambdaSchedule {
            components: vec!["lambda".into()],
            values: vec![values],
        }
    }

    /// `count` states spaced by `spacing` (count ≥ 2).
    pub fn spaced(count: usize, spacing: Spacing) -> Self {
        let n = (count.max(2) - 1) as f64;
        let values = (0..count)
            .map(|k| {
                let x = k as f64 / n;
                match spacing {
                    Spacing::Linear => x,
                    Spacing::Ends => (1.0 - (std::f64::consts::PI * x).cos()) / 2.0,
                }
            })
            .map(|v| (v * 1e12).round() / 1e12)
            .collect();
        Self::single(values)
    }

    /// Number of states K.
    pub fn count(&self) -> usize {
        self.values.first().map_or(0, Vec::len)
    }

    /// The primary λ of state `k`: the value of the single component, or k/(K−1)
    /// for several components.
    pub fn primary(&self, k: usize) -> f64 {
        if self.components.len() == 1 {
            self.values[0][k]
        } else {
            let n = self.count();
            if n < 2 {
                0.0
            } else {
                k as f64 / (n - 1) as f64
            }
        }
    }

    /// The primary λ of every state.
    pub fn primaries(&self) -> Vec<f64> {
        (0..self.count()).map(|k| self.primary(k)).collect()
    }

    /// Component values of state `k`, in component order.
    pub fn state(&self, k: usize) -> Vec<(String, f64)> {
        self.components
            .iter()
            .zip(&self.values)
            .map(|(c, v)| (c.clone(), v[k]))
            .collect()
    }
}

/// Problems with one component's values: (index of the offending value or None
/// for the whole list, message, hint).
pub fn check_values(values: &[f64], strict: bool) -> Vec<(Option<usize>, String, String)> {
    let mut out = Vec::new();
    if values.len() < 2 {
        out.push((
            None,
            format!(
                "a λ schedule needs at least 2 states, this one has {}",
                values.len()
            ),
            "list at least the end states 0 and 1, e.g. [0, 0.5, 1]".into(),
        ));
        return out;
    }
    for (i, &v) in values.iter().enumerate() {
        if !(0.0..=1.0).contains(&v) || v.is_nan() {
            out.push((
                Some(i),
                format!("λ value {v} is outside [0, 1]"),
                "every λ must lie between 0 and 1".into(),
            ));
        }
    }
    for i in 1..values.len() {
        let (a, b) = (values[i - 1], values[i]);
        if b < a {
            out.push((
                Some(i),
                format!("λ values are not monotonic: {b} follows {a}"),
                "list λ values in increasing order".into(),
            ));
        } else if strict && b == a {
            out.push((
                Some(i),
                format!("λ value {b} is repeated"),
                "each state must have its own λ: remove the repeated value".into(),
            ));
        }
    }
    if values[0] != 0.0 {
        out.push((
            Some(0),
            format!("the first λ is {}, not 0", values[0]),
            "a schedule must start at λ = 0".into(),
        ));
    }
    let last = values.len() - 1;
    if values[last] != 1.0 {
        out.push((
            Some(last),
            format!("the last λ is {}, not 1", values[last]),
            "a schedule must end at λ = 1".into(),
        ));
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn spacings() {
        let l = LambdaSchedule::spaced(5, Spacing::Linear);
        assert_eq!(l.values[0], vec![0.0, 0.25, 0.5, 0.75, 1.0]);
        let e = LambdaSchedule::spaced(5, Spacing::Ends);
        // (1 - cos(πk/4))/2 for k = 0..4: 0, 0.146447, 0.5, 0.853553, 1
        assert!((e.values[0][1] - 0.146_446_609_4).abs() < 1e-9);
        assert_eq!(e.values[0][2], 0.5);
        assert_eq!(e.values[0][4], 1.0);
        assert!(check_values(&e.values[0], true).is_empty());
    }

    #[test]
    fn primary_of_components() {
        let s = LambdaSchedule {
            components: vec!["charge".into(), "vdw".into()],
            values: vec![vec![0.0, 1.0, 1.0], vec![0.0, 0.0, 1.0]],
        };
        assert_eq!(s.primaries(), vec![0.0, 0.5, 1.0]);
        assert_eq!(
            s.state(1),
            vec![("charge".into(), 1.0), ("vdw".into(), 0.0)]
        );
    }

    #[test]
    fn bad_values() {
        assert_eq!(check_values(&[0.0], true).len(), 1);
        assert!(check_values(&[0.0, 0.5, 0.4, 1.0], true)[0]
            .1
            .contains("monotonic"));
        assert!(check_values(&[0.0, 0.5, 0.5, 1.0], true)[0]
            .1
            .contains("repeated"));
        assert!(check_values(&[0.0, 0.5, 0.5, 1.0], false).is_empty());
        assert!(check_values(&[0.0, 1.2], true)
            .iter()
            .any(|p| p.1.contains("outside")));
        assert!(check_values(&[0.1, 1.0], true)[0].1.contains("not 0"));
    }
}
