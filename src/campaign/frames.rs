//! A leg's `frames` and `window_frames`: how many frames the analysed stage's
//! output must hold, for the whole leg and per window, over the stage's own
//! `frames` (see [`LegFrames::for_window`]).

use super::fields::{Ctx, Fields};
use super::yaml::{Node, Value};
use std::collections::BTreeMap;

/// The keys of a leg this module reads.
pub const KEYS: &[&str] = &["frames", "window_frames"];

/// Most frames one window may ask for (catches typos such as `1e12`).
const MAX_FRAMES: u64 = 1_000_000_000_000;

/// A leg's frame targets for the analysed stage.
#[derive(Debug, Clone, Default, PartialEq, Eq, serde::Serialize)]
pub struct LegFrames {
    /// Every window of the leg (the leg's `frames:`).
    pub all: Option<u64>,
    /// Window index (from 0) → frames (the leg's `window_frames:`).
    pub windows: BTreeMap<usize, u64>,
}

impl LegFrames {
    /// The target of window `w`: its own entry, else the leg's, else `stage`.
    pub fn for_window(&self, w: usize, stage: Option<u64>) -> Option<u64> {
        self.windows.get(&w).copied().or(self.all).or(stage)
    }
}

/// Reads `frames` and `window_frames` of a leg with `windows` λ states.
pub(super) fn leg_frames(ctx: &mut Ctx, lf: &Fields, what: &str, windows: usize) -> LegFrames {
    let all = lf
        .get("frames")
        .and_then(|n| count(ctx, n, &format!("frames of {what}")));
    let mut out = LegFrames {
        all,
        windows: BTreeMap::new(),
    };
    let Some(node) = lf.get("window_frames") else {
        return out;
    };
    let name = format!("window_frames of {what}");
    let Value::Map(entries) = &node.value else {
        ctx.error(
            node.pos,
            format!(
                "{name} must map window numbers to frames, not {}",
                node.kind()
            ),
            Some("e.g. window_frames: { 0: 12000, 11: 12000 } (windows from 0)".to_string()),
        );
        return out;
    };
    for (k, v) in entries {
        let Some(w) = window(ctx, k, &name, windows) else {
            continue;
        };
        if out.windows.contains_key(&w) {
            ctx.error(
                k.pos,
                format!("window {w} appears twice in {name}"),
                Some("remove one of them: the later one would silently win".to_string()),
            );
            continue;
        }
        if let Some(f) = count(ctx, v, &format!("frames of window {w} in {name}")) {
            out.windows.insert(w, f);
        }
    }
    out
}

/// A window number key, from 0 to `windows` − 1.
fn window(ctx: &mut Ctx, k: &Node, name: &str, windows: usize) -> Option<usize> {
    let parsed = match &k.value {
        Value::Int(i) => usize::try_from(*i).ok(),
        Value::Str(s) => s.trim().parse::<usize>().ok(),
        _ => None,
    };
    match parsed {
        Some(w) if windows == 0 || w < windows => Some(w),
        Some(w) => {
            ctx.error(
                k.pos,
                format!(
                    "{name}: window {w} does not exist; the leg has windows 0 to {}",
                    windows - 1
                ),
                Some("windows are numbered from 0, as in the task ids' wNN".to_string()),
            );
            None
        }
        None => {
            ctx.error(
                k.pos,
                format!("{name}: `{}` is not a window number", k.key_text()),
                Some(
                    "use the window's number from 0, e.g. window_frames: { 3: 12000 }".to_string(),
                ),
            );
            None
        }
    }
}

/// A frame count from 1 to [`MAX_FRAMES`].
fn count(ctx: &mut Ctx, n: &Node, what: &str) -> Option<u64> {
    match ctx.uint(n, what) {
        Some(0) => {
            ctx.error(
                n.pos,
                format!("{what} must be at least 1"),
                Some("leave it out to use the stage's frames".to_string()),
            );
            None
        }
        Some(v) => ctx.in_range(n, what, v, 1, MAX_FRAMES),
        None => None,
    }
}
