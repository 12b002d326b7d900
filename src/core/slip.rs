//! The unit-slip detector the audit and the repair share: each row's log10 ratio to the
//! previous period of the same entity, and whether it sits near a factor of 10^3 or 10^6.

use super::values::View;

/// The rows of `x` whose change from the row before is a unit slip (`back[r]`: the row
/// before is the previous period of the same entity; both values present and positive; the
/// log10 of their ratio near ±3 or ±6, see [`magnitude`]), with the slip's magnitude, in row
/// order; and how many of those changes jump in the log level by more than `log_jump` (natural
/// log; 0 when None). The one detector the audit and the repair share. Most changes are small:
/// a ratio within a calm band (a margin far above rounding inside both thresholds) is neither,
/// and its logarithm is not taken.
pub fn slips(back: &[bool], x: &View, log_jump: Option<f64>) -> (Vec<(usize, i8)>, u64) {
    let slip = 3.0 - std::f64::consts::LOG10_2;
    let quiet = 0.99 * log_jump.map_or(slip, |j| (j / std::f64::consts::LN_10).min(slip));
    let (calm_lo, calm_hi) = (10f64.powf(-quiet), 10f64.powf(quiet));
    let mut hits: Vec<(usize, i8)> = Vec::new();
    let mut jumps = 0u64;
    for (r, _) in back.iter().enumerate().skip(1).filter(|(_, back)| **back) {
        let (Some(a), Some(b)) = (x.get(r), x.get(r - 1)) else {
            continue;
        };
        if !(a > 0.0 && b > 0.0) {
            continue;
        }
        let q = a / b;
        if q > calm_lo && q < calm_hi {
            continue;
        }
        let ratio = q.log10();
        if let Some(j) = log_jump {
            jumps += u64::from((ratio * std::f64::consts::LN_10).abs() > j);
        }
        if let Some(m) = magnitude(ratio) {
            hits.push((r, m as i8));
        }
    }
    (hits, jumps)
}

/// The unit-slip magnitude of a log10 ratio to the previous period: 3 or 6 (or −3, −6) when
/// the ratio is within a factor of two of 10^3 or 10^6 (or their inverses), else None. With
/// `log_ratios`, the one unit-slip detector the audit and the repair share.
pub fn magnitude(r: f64) -> Option<i32> {
    // How far (in log10 units) a ratio may sit from 10^3 or 10^6 and still count as a slip:
    // log10(2), so factors between 500 and 2000 count as 1000.
    let slack = std::f64::consts::LOG10_2;
    [6, -6, 3, -3]
        .into_iter()
        .find(|m| (r - f64::from(*m)).abs() < slack)
}
