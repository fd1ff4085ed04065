//! Samples of one window and of one leg, held compactly in reduced units.

use serde::{Deserialize, Serialize};
use std::path::PathBuf;

/// The samples of one window (one sampled λ state).
///
/// `reduced` is one contiguous row-major matrix `frames × n_states`: row `n` holds
/// the reduced potential u_j(x_n) = U_j(x_n)/kT of frame `n` evaluated at every
/// state j. Rows are defined up to an additive constant per frame (energies that
/// an engine writes relative to the sampled state are stored as they are); every
/// estimator uses only differences within a row. `dudl` is row-major
/// `frames × components`, in kT per unit λ.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct WindowSamples {
    /// Where the samples came from (for messages).
    pub source: PathBuf,
    /// 0-based index of the sampled state.
    pub state: usize,
    /// Temperature of the samples, K.
    pub temperature_k: f64,
    /// Primary λ of every state of the leg.
    pub lambdas: Vec<f64>,
    /// λ component names (`lambda` for a single-component leg).
    pub components: Vec<String>,
    /// Per component, its λ at every state.
    pub component_lambdas: Vec<Vec<f64>>,
    /// Number of frames (rows).
    pub frames: usize,
    /// Number of states of the leg (columns of `reduced`).
    pub n_states: usize,
    /// Reduced potentials, `frames × n_states`, row-major.
    pub reduced: Vec<f64>,
    /// dU/dλ per component in kT, `frames × components.len()`, row-major; empty
    /// when the output had no dU/dλ column.
    pub dudl: Vec<f64>,
    /// Things worth telling the user that did not stop the read.
    pub warnings: Vec<String>,
}

impl WindowSamples {
    /// A window from matrices already in reduced units (for callers and tests that
    /// generate samples). `reduced` is `frames × lambdas.len()`; `dudl` is empty or
    /// `frames × 1` for the single component `lambda`.
    ///
    /// # Panics
    ///
    /// When `reduced` is not a whole number of rows of `lambdas.len()` values, or
    /// `dudl` is neither empty nor one value per frame.
    ///
    /// # Examples
    ///
    /// ```
    /// use legwork_numerics::samples::WindowSamples;
    /// let w = WindowSamples::from_reduced(0, 300.0, vec![0.0, 1.0], vec![0.0, 1.0, 0.5, 2.0], vec![]);
    /// assert_eq!((w.frames, w.row(1)), (2, &[0.5, 2.0][..]));
    /// ```
    pub fn from_reduced(
        state: usize,
        temperature_k: f64,
        lambdas: Vec<f64>,
        reduced: Vec<f64>,
        dudl: Vec<f64>,
    ) -> WindowSamples {
        let n_states = lambdas.len();
        let frames = reduced.len().checked_div(n_states).unwrap_or(0);
        assert_eq!(
            frames * n_states,
            reduced.len(),
            "reduced is frames × states"
        );
        assert!(
            dudl.is_empty() || dudl.len() == frames,
            "dudl has one value per frame"
        );
        WindowSamples {
            source: PathBuf::from(format!("<state {state}>")),
            state,
            temperature_k,
            component_lambdas: vec![lambdas.clone()],
            lambdas,
            components: vec!["lambda".into()],
            frames,
            n_states,
            reduced,
            dudl,
            warnings: Vec::new(),
        }
    }

    /// The reduced potentials of frame `n` at every state.
    #[inline]
    ///
    /// # Panics
    ///
    /// When `n` is not a frame.
    pub fn row(&self, n: usize) -> &[f64] {
        &self.reduced[n * self.n_states..(n + 1) * self.n_states]
    }

    /// Whether dU/dλ was read.
    pub fn has_dudl(&self) -> bool {
        !self.dudl.is_empty()
    }

    /// dU/dλ of component `c` at frame `n`, kT.
    #[inline]
    ///
    /// # Panics
    ///
    /// When there is no dU/dλ for that frame and component.
    pub fn dudl_at(&self, n: usize, c: usize) -> f64 {
        self.dudl[n * self.components.len() + c]
    }
}

/// Every window of one leg, one per state, sorted by state.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct LegSamples {
    /// The windows; `windows[k].state == k`.
    pub windows: Vec<WindowSamples>,
    /// Temperature shared by every window, K.
    pub temperature_k: f64,
    /// Primary λ of every state.
    pub lambdas: Vec<f64>,
    /// λ component names.
    pub components: Vec<String>,
    /// Per component, its λ at every state.
    pub component_lambdas: Vec<Vec<f64>>,
    /// Warnings gathered while reading (truncated lines and the like).
    pub warnings: Vec<String>,
}

impl LegSamples {
    /// A leg from windows already checked by the caller to fit together (tests and
    /// generated data); sorts them by state and panics when they do not fit.
    ///
    /// # Panics
    ///
    /// When `windows` is empty or does not hold exactly one window per state.
    ///
    /// # Examples
    ///
    /// ```
    /// use legwork_numerics::samples::{LegSamples, WindowSamples};
    /// let w = |s| WindowSamples::from_reduced(s, 300.0, vec![0.0, 1.0], vec![0.0; 4], vec![]);
    /// let leg = LegSamples::from_windows(vec![w(1), w(0)]);
    /// assert_eq!((leg.n_states(), leg.windows[0].state), (2, 0));
    /// ```
    pub fn from_windows(mut windows: Vec<WindowSamples>) -> LegSamples {
        windows.sort_by_key(|w| w.state);
        let first = &windows[0];
        for (k, w) in windows.iter().enumerate() {
            assert_eq!(w.state, k, "one window per state");
            assert_eq!(w.n_states, windows.len(), "one window per state");
        }
        LegSamples {
            temperature_k: first.temperature_k,
            lambdas: first.lambdas.clone(),
            components: first.components.clone(),
            component_lambdas: first.component_lambdas.clone(),
            warnings: windows.iter().flat_map(|w| w.warnings.clone()).collect(),
            windows,
        }
    }

    /// Number of states.
    pub fn n_states(&self) -> usize {
        self.lambdas.len()
    }

    /// Bytes held by the energy matrices (for memory accounting).
    pub fn energy_bytes(&self) -> usize {
        self.windows.iter().map(|w| w.reduced.len() * 8).sum()
    }
}
