//! The predicted mode lines a recording is labelled against, from a small
//! process-wide cache, and the excitation ensemble used when the tap point
//! is not given.

use crate::fitting::matching;
use crate::physics::membrane::ModeLine;
use crate::physics::panel::Panel;

/// Predicted lines for a panel up to at least `g_max`, from a small
/// process-wide cache: a batch of recordings of one panel type asks for the
/// same lines again and again (circle lines cost Bessel evaluations). The
/// range is rounded up to a power of 1.25 times the fundamental factor so
/// that nearby requests share an entry.
fn cached_lines(panel: &Panel, g_max: f64) -> Vec<ModeLine> {
    with_cached_lines(panel, g_max, |lines| lines.to_vec())
}

/// Calls `f` on the cached lines of [`cached_lines`] without copying them.
fn with_cached_lines<R>(panel: &Panel, g_max: f64, f: impl FnOnce(&[ModeLine]) -> R) -> R {
    use std::collections::HashMap;
    use std::sync::{Mutex, OnceLock};
    type Key = (String, i32);
    static CACHE: OnceLock<Mutex<HashMap<Key, Vec<ModeLine>>>> = OnceLock::new();
    let g1 = panel.shape.fundamental_factor();
    let step = (g_max / g1).max(1.0).ln() / 1.25f64.ln();
    let bucket = step.ceil() as i32;
    let g_bucket = g1 * 1.25f64.powi(bucket);
    let key = (
        format!("{:?}|{:?}|{:?}", panel.shape, panel.tap, panel.pickup),
        bucket,
    );
    let cache = CACHE.get_or_init(|| Mutex::new(HashMap::new()));
    if let Some(hit) = cache.lock().unwrap_or_else(|e| e.into_inner()).get(&key) {
        return f(hit);
    }
    let lines = panel.shape.lines(g_bucket, panel.tap, panel.pickup);
    let out = f(&lines);
    let mut guard = cache.lock().unwrap_or_else(|e| e.into_inner());
    if guard.len() > 64 {
        guard.clear();
    }
    guard.insert(key, lines);
    out
}

/// Lines whose presence or absence the matcher weighs against the
/// possible tap points ([`matching::pattern_log_likelihood`]).
pub const ENSEMBLE_LINES: usize = 64;

/// The excitation ensemble of the first [`ENSEMBLE_LINES`] lines when
/// the tap point is not given (with it, each line's own coupling serves).
pub fn ensemble_for(panel: &Panel, lines: &[ModeLine]) -> Option<Vec<Vec<f64>>> {
    match panel.tap {
        Some(_) => None,
        None => Some(panel.shape.excitation_ensemble(lines, ENSEMBLE_LINES)),
    }
}

/// Lines far enough up that the lowest partial may be any of the first
/// few lines: g_max = g(ANCHOR_LINES-th line) · `f_ratio` (the highest
/// partial over the lowest). The factors do not depend on the tap, so the
/// cache serves here.
pub fn matching_lines(panel: &Panel, f_ratio: f64) -> Vec<ModeLine> {
    cached_lines(panel, matching_factor(panel, f_ratio))
}

/// The largest frequency factor [`matching_lines`] asks for.
pub fn matching_factor(panel: &Panel, f_ratio: f64) -> f64 {
    let g_probe = panel.shape.fundamental_factor() * 6.0;
    let g_anchor = with_cached_lines(panel, g_probe, |all| {
        let below = all.partition_point(|l| l.factor <= g_probe * (1.0 + 1e-12));
        all[..below]
            .get(matching::ANCHOR_LINES.min(below).max(1) - 1)
            .map(|l| l.factor)
    })
    .unwrap_or(panel.shape.fundamental_factor());
    g_anchor * f_ratio * 1.05
}
