//! The unit-slip detector the audit and the repair share: each row's log10 ratio to the
//! previous period of the same entity, and whether it sits near a factor of 10^3 or 10^6.

use super::Values;

/// The log10 ratio of each row of `x` to the previous period of the same entity, where both
/// are positive (`back[r]`: the row before is that period, on a panel sorted by entity and
/// period); else None.
pub fn log_ratios(back: &[bool], x: &Values) -> Vec<Option<f64>> {
    let x = x.view();
    (0..back.len())
        .map(|r| {
            if !back[r] {
                return None;
            }
            match (x.get(r), x.get(r - 1)) {
                (Some(a), Some(b)) if a > 0.0 && b > 0.0 => Some((a / b).log10()),
                _ => None,
            }
        })
        .collect()
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
