//! The demo's further raw files (headcount by firm-year, listing by firm, a price index) and
//! the year-end dates of its accounts, with their planted defects.

use super::*;

pub(super) const LISTINGS: [&str; 3] = ["main board", "growth board", "unlisted"];

/// What the further demo files hold, for the references to check the joins against.
#[derive(Debug, Default, Serialize)]
pub struct PlantedTables {
    /// Firm-years whose headcount was keyed with an extra zero (x10), as (firm, year); the
    /// corrections file sets them right.
    pub headcount_typos: Vec<(String, i64)>,
    /// Firm-years of the accounts left out of the headcount file.
    pub workforce_gaps: u64,
    /// Rows of the headcount file for firm-years the accounts do not have.
    pub workforce_strays: u64,
    /// Rows of the headcount file repeated exactly.
    pub workforce_copies: u64,
    /// Firms left out of the firm file.
    pub firms_left_out: u64,
    /// Rows of the firm file for firms the accounts do not have.
    pub firms_strays: u64,
    /// Years of the price index beyond the accounts' window.
    pub price_years_beyond: u64,
    /// Firms that moved their year end from December to March: the accounts' `fiscal_year`
    /// runs on, but a fiscal year derived from `year_end` (a year ending January–May belongs
    /// to the previous fiscal year) puts two of their rows into one year.
    pub year_end_changes: Vec<String>,
}

/// The further raw files of the demo, column by column.
#[derive(Default)]
pub(super) struct Tables {
    pub(super) wf_firm: Vec<String>,
    pub(super) wf_year: Vec<i64>,
    pub(super) wf_employees: Vec<i64>,
    pub(super) firm: Vec<String>,
    pub(super) listing: Vec<&'static str>,
    pub(super) price_year: Vec<i64>,
    pub(super) price_index: Vec<f64>,
    pub(super) corrections: Vec<(String, i64, i64)>,
}

/// Each row's fiscal-year-end date, `YYYY-MM-DD`: a year ending in June or December is the
/// fiscal year of its calendar year; one ending in March closes the fiscal year before (so
/// fiscal year Y ends on 31 March of Y + 1), except after a firm's move from December to
/// March, where the accounts keep counting years on (fiscal year Y then ends 31 March of Y).
/// Rows without a firm take December; rows without a year have no date.
pub(super) fn year_end_dates(
    c: &Columns,
    year_ends: &std::collections::HashMap<String, (u32, Option<i64>)>,
) -> Vec<Option<String>> {
    c.firm
        .iter()
        .zip(&c.year)
        .map(|(firm, year)| {
            let year = (*year)?;
            let (month, change) = firm
                .as_ref()
                .and_then(|f| year_ends.get(f))
                .copied()
                .unwrap_or((12, None));
            Some(match (month, change) {
                (12, Some(k)) if year >= k => format!("{year}-03-31"),
                (12, _) => format!("{year}-12-31"),
                (6, _) => format!("{year}-06-30"),
                _ => format!("{}-03-31", year + 1),
            })
        })
        .collect()
}

/// The further files' own defects: headcount typos (set right by the corrections file), stray
/// rows for firm-years and firms the accounts lack, an exact copy, a price index that runs a
/// year beyond the accounts.
pub(super) fn plant_table_defects(
    t: &mut Tables,
    planted: &mut PlantedTables,
    rng: &mut ChaCha8Rng,
    periods: i64,
    width: usize,
) {
    let n = t.wf_firm.len();
    if n >= 20 {
        let mut picked: Vec<usize> = Vec::new();
        while picked.len() < 2 {
            let i = rng.random_range(0..n);
            if !picked.contains(&i) {
                picked.push(i);
            }
        }
        picked.sort_unstable();
        for i in picked {
            let right = t.wf_employees[i];
            t.wf_employees[i] = right * 10;
            planted
                .headcount_typos
                .push((t.wf_firm[i].clone(), t.wf_year[i]));
            t.corrections
                .push((t.wf_firm[i].clone(), t.wf_year[i], right));
        }
        let i = rng.random_range(0..n);
        let (f, y, e) = (t.wf_firm[i].clone(), t.wf_year[i], t.wf_employees[i]);
        t.wf_firm.push(f);
        t.wf_year.push(y);
        t.wf_employees.push(e);
        planted.workforce_copies = 1;
    }
    // Firms that are not in the accounts (ids beyond the generated ones).
    let stray = |k: usize| format!("VX{:0width$}", k + 1);
    for k in 0..2 {
        t.wf_firm.push(stray(k));
        t.wf_year.push(FIRST_YEAR);
        t.wf_employees.push(40 + k as i64);
        planted.workforce_strays += 1;
        t.firm.push(stray(k));
        t.listing.push("unlisted");
        planted.firms_strays += 1;
    }
    // The index: 2010 = 100, about two per cent a year, one decimal as statistical offices
    // publish it; it runs one year beyond the accounts.
    let mut level = 100.0f64;
    for y in 0..=periods {
        t.price_year.push(FIRST_YEAR + y);
        t.price_index.push((level * 10.0).round() / 10.0);
        level *= 1.0 + rng.random_range(0.005..0.035);
    }
    planted.price_years_beyond = 1;
}
