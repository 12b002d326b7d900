//! The invented demo panel: fictional firms of the imaginary Republic of Velmora, generated
//! deterministically from a seed, with planted defects that the audit must find. Columns are
//! built whole (one vector per column), so 10 million rows take seconds.

use std::fs;
use std::path::Path;

use polars::prelude::*;
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use rand_distr::{Distribution, Normal};
use serde::Serialize;

use crate::{Error, Result};

/// The first fiscal year of the demo window.
pub const FIRST_YEAR: i64 = 2010;
/// The data file inside the demo data folder.
pub const DATA_FILE: &str = "velmora_accounts.csv";
/// The firm-year headcount file joined onto the accounts.
pub const WORKFORCE_FILE: &str = "velmora_workforce.csv";
/// The firm file (stock-market listing) joined onto the accounts.
pub const FIRMS_FILE: &str = "velmora_firms.csv";
/// The invented consumer price index by fiscal year.
pub const PRICES_FILE: &str = "velmora_prices.csv";
/// The corrections file of the demo.
pub const CORRECTIONS_FILE: &str = "corrections.csv";

const LISTINGS: [&str; 3] = ["main board", "growth board", "unlisted"];

const SECTORS: [&str; 6] = [
    "agrifood",
    "machinery",
    "retail",
    "software",
    "shipping",
    "utilities",
];
const REGIONS: [&str; 5] = [
    "Amberlea",
    "Brisk Hollow",
    "Corvane",
    "Dunmere",
    "Eskerfold",
];

/// Defects planted in the demo data, written to `planted.json` so tests can count them.
#[derive(Debug, Default, Serialize)]
pub struct Planted {
    /// Firms generated.
    pub firms: u64,
    /// Rows written (including every planted row).
    pub rows: u64,
    /// Rows whose firm id or fiscal year is blank.
    pub missing_key_rows: u64,
    /// Rows repeated exactly, as (firm, year).
    pub exact_copies: Vec<(String, i64)>,
    /// Keys given a second row with different values, as (firm, year).
    pub conflicting_keys: Vec<(String, i64)>,
    /// Single-year ×1000 slips in total assets, as (firm, year).
    pub unit_slips: Vec<(String, i64)>,
    /// Rows whose total assets were set to zero or below, as (firm, year).
    pub nonpositive_assets: Vec<(String, i64)>,
    /// Rows whose net profit was blown up fifty-fold, as (firm, year).
    pub outliers: Vec<(String, i64)>,
    /// Rows whose interest paid was keyed as a negative number, as (firm, year).
    pub negative_interest: Vec<(String, i64)>,
    /// Firms observed in exactly one year.
    pub singleton_firms: u64,
    /// Firms with at least one internal gap.
    pub firms_with_gaps: u64,
    /// Rows with zero interest paid.
    pub zero_interest_rows: u64,
    /// Rows with R&D spending missing.
    pub missing_rd_rows: u64,
    /// The further raw files and what they hold.
    pub tables: PlantedTables,
}

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
struct Tables {
    wf_firm: Vec<String>,
    wf_year: Vec<i64>,
    wf_employees: Vec<i64>,
    firm: Vec<String>,
    listing: Vec<&'static str>,
    price_year: Vec<i64>,
    price_index: Vec<f64>,
    corrections: Vec<(String, i64, i64)>,
}

/// Column vectors under construction.
#[derive(Default)]
struct Columns {
    firm: Vec<Option<String>>,
    year: Vec<Option<i64>>,
    sector: Vec<&'static str>,
    region: Vec<&'static str>,
    founded: Vec<i64>,
    assets: Vec<Option<f64>>,
    revenue: Vec<Option<f64>>,
    net_profit: Vec<Option<f64>>,
    op_profit: Vec<Option<f64>>,
    interest: Vec<Option<f64>>,
    rnd: Vec<Option<f64>>,
    cur_assets: Vec<Option<f64>>,
    cur_liab: Vec<Option<f64>>,
    debt_short: Vec<Option<f64>>,
    debt_long: Vec<Option<f64>>,
    gdp_growth: Vec<f64>,
    /// Filled after the defects are planted, from each row's firm and year.
    year_end: Vec<Option<String>>,
}

impl Columns {
    fn copy_row(&mut self, i: usize) {
        self.firm.push(self.firm[i].clone());
        self.year.push(self.year[i]);
        self.sector.push(self.sector[i]);
        self.region.push(self.region[i]);
        self.founded.push(self.founded[i]);
        for v in self.values_mut() {
            let x = v[i];
            v.push(x);
        }
        self.gdp_growth.push(self.gdp_growth[i]);
    }

    fn values_mut(&mut self) -> [&mut Vec<Option<f64>>; 10] {
        [
            &mut self.assets,
            &mut self.revenue,
            &mut self.net_profit,
            &mut self.op_profit,
            &mut self.interest,
            &mut self.rnd,
            &mut self.cur_assets,
            &mut self.cur_liab,
            &mut self.debt_short,
            &mut self.debt_long,
        ]
    }

    fn into_frame(self) -> Result<DataFrame> {
        let round = |v: Vec<Option<f64>>| -> Vec<Option<f64>> {
            v.into_iter()
                .map(|x| x.map(|x| (x * 10.0).round() / 10.0))
                .collect()
        };
        Ok(df!(
            "firm_id" => self.firm,
            "fiscal_year" => self.year,
            "sector" => self.sector,
            "region" => self.region,
            "founded" => self.founded,
            "assets_total" => round(self.assets),
            "revenue" => round(self.revenue),
            "net_profit" => round(self.net_profit),
            "op_profit" => round(self.op_profit),
            "interest_paid" => round(self.interest),
            "rnd_spend" => round(self.rnd),
            "cur_assets" => round(self.cur_assets),
            "cur_liabilities" => round(self.cur_liab),
            "debt_short" => round(self.debt_short),
            "debt_long" => round(self.debt_long),
            "gdp_growth" => self.gdp_growth.iter().map(|g| (g * 10000.0).round() / 10000.0).collect::<Vec<f64>>(),
            "year_end" => self.year_end,
        )?)
    }
}

/// Generate the demo panel and the record of planted defects.
pub fn generate(firms: u32, periods: u32, seed: u64) -> Result<(DataFrame, Planted)> {
    let (df, planted, _) = generate_all(firms, periods, seed)?;
    Ok((df, planted))
}

/// The demo panel, the record of planted defects and the further raw files. The further
/// files draw from their own random stream, so the accounts do not depend on them.
fn generate_all(firms: u32, periods: u32, seed: u64) -> Result<(DataFrame, Planted, Tables)> {
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    let mut side = ChaCha8Rng::seed_from_u64(seed.wrapping_add(0x5eed));
    let mut tables = Tables::default();
    let mut year_ends: std::collections::HashMap<String, (u32, Option<i64>)> =
        std::collections::HashMap::new();
    let std_normal = Normal::new(0.0, 1.0).expect("valid normal");
    let z = move |rng: &mut ChaCha8Rng| -> f64 { std_normal.sample(rng) };
    let t = periods as i64;
    let width = (firms.max(1) as f64).log10().floor() as usize + 1;
    let width = width.max(5);
    let gdp: Vec<f64> = (0..t).map(|_| 0.02 + 0.015 * z(&mut rng)).collect();

    let mut c = Columns::default();
    let mut planted = Planted {
        firms: u64::from(firms),
        ..Planted::default()
    };
    for i in 0..firms {
        let id = format!("VM{:0width$}", i + 1);
        let sector = SECTORS[rng.random_range(0..SECTORS.len())];
        let region = REGIONS[rng.random_range(0..REGIONS.len())];
        let founded = FIRST_YEAR - rng.random_range(1..60);
        // Entry, exit and gaps: most firms span the window, some enter late or leave early.
        let first = if rng.random_bool(0.3) {
            rng.random_range(1..t)
        } else {
            0
        };
        let last = if rng.random_bool(0.25) {
            rng.random_range(first..t)
        } else {
            t - 1
        };
        let (first, last) = if rng.random_bool(0.01) {
            (first, first)
        } else {
            (first, last)
        };
        let mut gap = None;
        if last - first >= 4 && rng.random_bool(0.06) {
            let start = rng.random_range(first + 1..last - 1);
            gap = Some((start, start + rng.random_range(0..2)));
            planted.firms_with_gaps += 1;
        }
        if first == last {
            planted.singleton_firms += 1;
        }
        // Firm traits.
        let mut log_assets = 5.5 + 1.2 * z(&mut rng);
        let turnover = (0.9f64.ln() + 0.3 * z(&mut rng)).exp();
        let roa_mean = 0.04 + 0.05 * z(&mut rng);
        let leverage = rng.random_range(0.05..0.5);
        let no_debt = rng.random_bool(0.08);
        let rate = rng.random_range(0.02..0.08);
        let rd_firm = matches!(sector, "software" | "machinery") || rng.random_bool(0.15);
        let rd_share = rng.random_range(0.01..0.1);
        // The firm file leaves out one firm in a hundred.
        if !side.random_bool(0.01) {
            tables.firm.push(id.clone());
            tables
                .listing
                .push(LISTINGS[side.random_range(0..LISTINGS.len())]);
        } else {
            planted.tables.firms_left_out += 1;
        }
        let staff_per_asset = side.random_range(0.2..0.6);
        // The year end: December for most firms, June or March for some; one firm in a
        // hundred with four or more years moves from December to March two years in.
        let month = match side.random_range(0..20) {
            0..=2 => 6,
            3..=5 => 3,
            _ => 12,
        };
        let change = (month == 12 && last - first >= 3 && gap.is_none() && side.random_bool(0.03))
            .then_some(FIRST_YEAR + first + 2);
        year_ends.insert(id.clone(), (month, change));
        for y in 0..t {
            log_assets += 0.05 + 0.12 * z(&mut rng);
            let roa = roa_mean + 0.04 * z(&mut rng);
            let ca_share = rng.random_range(0.2..0.6);
            let cl_share = rng.random_range(0.1..0.5);
            let rd_noise = rng.random_range(0.8..1.2);
            let rd_gone = rng.random_bool(0.1);
            let in_span = y >= first && y <= last && gap.is_none_or(|(a, b)| y < a || y > b);
            if !in_span {
                continue;
            }
            let assets = log_assets.exp();
            // Headcount: the headcount file misses one firm-year in fifty.
            if side.random_bool(0.02) {
                planted.tables.workforce_gaps += 1;
            } else {
                tables.wf_firm.push(id.clone());
                tables.wf_year.push(FIRST_YEAR + y);
                tables
                    .wf_employees
                    .push(((assets * staff_per_asset).round() as i64).max(1));
            }
            let debt = if no_debt { 0.0 } else { assets * leverage };
            let interest = debt * rate;
            let net = assets * roa;
            c.firm.push(Some(id.clone()));
            c.year.push(Some(FIRST_YEAR + y));
            c.sector.push(sector);
            c.region.push(region);
            c.founded.push(founded);
            c.assets.push(Some(assets));
            c.revenue.push(Some(assets * turnover));
            c.net_profit.push(Some(net));
            c.op_profit.push(Some(net + interest + assets * 0.01));
            c.interest.push(Some(interest));
            c.rnd
                .push((rd_firm && !rd_gone).then_some(assets * rd_share * rd_noise));
            c.cur_assets.push(Some(assets * ca_share));
            c.cur_liab.push(Some(assets * cl_share));
            c.debt_short.push(Some(debt * 0.3));
            c.debt_long.push(Some(debt * 0.7));
            c.gdp_growth.push(gdp[y as usize]);
        }
    }
    plant_defects(&mut c, &mut planted, &mut rng);
    planted.rows = c.firm.len() as u64;
    planted.zero_interest_rows = c.interest.iter().filter(|v| **v == Some(0.0)).count() as u64;
    planted.missing_rd_rows = c.rnd.iter().filter(|v| v.is_none()).count() as u64;
    plant_table_defects(&mut tables, &mut planted.tables, &mut side, t, width);
    c.year_end = year_end_dates(&c, &year_ends);
    let mut changed: Vec<String> = year_ends
        .iter()
        .filter(|(_, (_, change))| change.is_some())
        .map(|(firm, _)| firm.clone())
        .collect();
    changed.sort();
    planted.tables.year_end_changes = changed;
    Ok((c.into_frame()?, planted, tables))
}

/// Each row's fiscal-year-end date, `YYYY-MM-DD`: a year ending in June or December is the
/// fiscal year of its calendar year; one ending in March closes the fiscal year before (so
/// fiscal year Y ends on 31 March of Y + 1), except after a firm's move from December to
/// March, where the accounts keep counting years on (fiscal year Y then ends 31 March of Y).
/// Rows without a firm take December; rows without a year have no date.
fn year_end_dates(
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
fn plant_table_defects(
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

/// Plant the defects a careful researcher must catch. Counts scale with the panel.
fn plant_defects(c: &mut Columns, planted: &mut Planted, rng: &mut ChaCha8Rng) {
    let n = c.firm.len();
    if n < 20 {
        return;
    }
    let per = |k: usize| (n / 1000 * k).clamp(1, 1_000_000);
    let key = |c: &Columns, i: usize| {
        (
            c.firm[i].clone().unwrap_or_default(),
            c.year[i].unwrap_or(0),
        )
    };
    // Rows that have a neighbour of the same firm on both sides (for reversing slips).
    let interior = |c: &Columns, i: usize| {
        i > 0
            && i + 1 < n
            && c.firm[i - 1] == c.firm[i]
            && c.firm[i + 1] == c.firm[i]
            && c.year[i - 1].map(|y| y + 1) == c.year[i]
            && c.year[i + 1].map(|y| y - 1) == c.year[i]
    };
    let mut used = vec![false; n];
    let mut pick = |rng: &mut ChaCha8Rng, c: &Columns, need_interior: bool| -> usize {
        loop {
            let i = rng.random_range(0..n);
            if !used[i]
                && (!need_interior || interior(c, i))
                && (i == 0 || !used[i - 1])
                && (i + 1 >= n || !used[i + 1])
            {
                used[i] = true;
                return i;
            }
        }
    };
    for _ in 0..per(2) {
        let i = pick(rng, c, true);
        for v in [&mut c.assets, &mut c.revenue] {
            v[i] = v[i].map(|x| x * 1000.0);
        }
        planted.unit_slips.push(key(c, i));
    }
    for k in 0..per(1) {
        let i = pick(rng, c, false);
        c.assets[i] = Some(if k % 2 == 0 {
            0.0
        } else {
            -c.assets[i].unwrap_or(1.0)
        });
        planted.nonpositive_assets.push(key(c, i));
    }
    for _ in 0..per(1) {
        let i = pick(rng, c, false);
        c.net_profit[i] = c.net_profit[i].map(|x| x.abs() * 50.0 + 100.0);
        planted.outliers.push(key(c, i));
    }
    for _ in 0..per(1).div_ceil(3) {
        let i = pick(rng, c, false);
        c.interest[i] = c.interest[i].map(|x| -x - 1.0);
        planted.negative_interest.push(key(c, i));
    }
    let copies: Vec<usize> = (0..per(1)).map(|_| pick(rng, c, false)).collect();
    let conflicts: Vec<usize> = (0..per(1)).map(|_| pick(rng, c, false)).collect();
    for i in copies {
        c.copy_row(i);
        planted.exact_copies.push(key(c, i));
    }
    for i in conflicts {
        c.copy_row(i);
        let last = c.firm.len() - 1;
        c.assets[last] = c.assets[last].map(|x| x * 1.05);
        planted.conflicting_keys.push(key(c, i));
    }
    for k in 0..3 {
        let i = pick(rng, c, false);
        c.copy_row(i);
        let last = c.firm.len() - 1;
        if k < 2 {
            c.firm[last] = None;
        } else {
            c.year[last] = None;
        }
        planted.missing_key_rows += 1;
    }
}

/// The demo's raw column names under the canonical names, shared by both demo rules files.
macro_rules! demo_columns {
    () => {
        r#"[columns]
total_assets = "assets_total"
sales = "revenue"
net_income = "net_profit"
ebit = "op_profit"
interest_expense = "interest_paid"
rd_expense = "rnd_spend"
current_assets = "cur_assets"
current_liabilities = "cur_liabilities"
short_term_debt = "debt_short"
long_term_debt = "debt_long"
"#
    };
}

/// The demo rules file: maps the raw names to canonical ones and adds two variables.
pub const RULES: &str = concat!(
    r#"# Rules for the Velmora demo panel (invented data).
include = ["standard"]

[panel]
entity = "firm_id"
period = "fiscal_year"

"#,
    demo_columns!(),
    r#"
# Further raw files, joined onto the accounts after the key steps (paths relative to this
# file): headcount by firm-year, the stock-market listing by firm, a price index by year.
[[join]]
file = "velmora_workforce.csv"
on = ["firm_id", "fiscal_year"]

[[join]]
file = "velmora_firms.csv"
on = ["firm_id"]

[[join]]
file = "velmora_prices.csv"
on = ["fiscal_year"]
rename = { year = "fiscal_year" }

# Firm-year overrides, each with its reason; every changed cell goes to corrections.csv.
[repair]
corrections = "corrections.csv"

# Deflating: sales at 2010 prices, an ordinary derived expression over a joined column.
[derive.real_sales]
expr = "sales / cpi * 100"
label = "Sales at 2010 prices"
unit = "thousand crowns of 2010"
source = "common practice (deflating by a price index)"

[derive.firm_age]
expr = "fiscal_year - founded"
label = "Firm age in years"
unit = "years"
source = "common practice"

[derive.asset_growth]
expr = "growth(total_assets, 1)"
label = "Growth of total assets on the previous fiscal year"
unit = "ratio"
source = "common practice"

[model]
outcome = "roa"
regressors = ["size", "leverage", "rd_assets", "working_capital_assets"]
effects = ["firm_id"]              # fixed effects by key column; add "fiscal_year" for period effects

[clean]
duplicates = "keep-first"
# Winsorize the ratios at the 1st and 99th percentiles over all firm-years.
winsorize = { variables = ["roa", "roa_lagged_assets", "leverage", "interest_cover", "sales_growth", "asset_growth", "working_capital_assets", "rd_assets"], lower = 0.01, upper = 0.99, by = "pooled" }
"#
);

/// A second rules file for the demo: the fiscal year derived from the year-end date instead
/// of taken from `fiscal_year`.
pub const RULES_YEAR_END: &str = concat!(
    r#"# The Velmora accounts with the fiscal year derived from each row's year-end date, not
# taken from the accounts' own `fiscal_year` column (invented data). A year ending January to
# May belongs to the previous fiscal year (common practice). Firms that moved their year end
# show up in the Keys section, and the two rows they put into one fiscal year are conflicting
# keys, handled by [clean] duplicates.
include = ["standard"]

[panel]
entity = "firm_id"
period = "fiscal_year_from_date"
year_end = "year_end"
year_end_cutoff = 5

"#,
    demo_columns!(),
    r#"
[clean]
duplicates = "keep-first"
"#
);

fn readme(p: &Planted, firms: u32, periods: u32, seed: u64) -> String {
    format!(
        "# Velmora demo panel (invented)\n\n\
Accounts of {firms} fictional firms in the imaginary Republic of Velmora over {periods} fiscal \
years from {FIRST_YEAR}, in thousands of Velmoran crowns. Every firm, region and number here is \
made up by `panelready demo --firms {firms} --periods {periods} --seed {seed}`; none describes a \
real company.\n\n\
Planted defects, for the audit to find:\n\n\
- {} rows with a blank firm id or fiscal year\n\
- {} firm-years repeated exactly, {} firm-years given a second row with other values\n\
- {} single-year slips where total assets and revenue were keyed in crowns, not thousands (x1000)\n\
- {} firm-years with total assets of zero or below, {} firm-years with net profit blown up\n\
- {} firm-years with a negative interest expense\n\
- {} firms observed in one year only, {} firms with an internal gap, late entrants and early leavers\n\
- {} rows with zero interest paid (firms without debt), {} rows with R&D spending missing\n\
- time-invariant columns (`sector`, `region`, `founded`) and a macro series (`gdp_growth`)\n\
- each row's fiscal-year-end date (`year_end`); {} firms move their year end from December to \
March (`rules_year_end.toml` derives the fiscal year from the date and finds them)\n\n\
Further raw files, joined onto the accounts by `rules.toml`:\n\n\
- `{WORKFORCE_FILE}`: headcount by firm-year; {} firm-years of the accounts are missing, {} rows \
are for firms the accounts do not have, {} row is repeated exactly, and {} headcounts were keyed \
with an extra zero\n\
- `{FIRMS_FILE}`: each firm's stock-market listing; {} firms are missing, {} rows are for firms \
the accounts do not have\n\
- `{PRICES_FILE}`: an invented consumer price index (2010 = 100), one year beyond the accounts\n\
- `{CORRECTIONS_FILE}`: the right headcounts for the typos above, each with its reason\n\n\
`planted.json` lists every planted defect; `rules.toml` maps the raw columns to the canonical \
names the built-in ratios use, joins the further files and deflates sales by the index.\n",
        p.missing_key_rows,
        p.exact_copies.len(),
        p.conflicting_keys.len(),
        p.unit_slips.len(),
        p.nonpositive_assets.len(),
        p.outliers.len(),
        p.negative_interest.len(),
        p.singleton_firms,
        p.firms_with_gaps,
        p.zero_interest_rows,
        p.missing_rd_rows,
        p.tables.year_end_changes.len(),
        p.tables.workforce_gaps,
        p.tables.workforce_strays,
        p.tables.workforce_copies,
        p.tables.headcount_typos.len(),
        p.tables.firms_left_out,
        p.tables.firms_strays,
    )
}

/// Write the demo data folder: the CSV, its rules file, a README and `planted.json`.
pub fn write_data(dir: &Path, firms: u32, periods: u32, seed: u64) -> Result<Planted> {
    let (mut df, planted, tables) = generate_all(firms, periods, seed)?;
    fs::create_dir_all(dir).map_err(Error::io(dir))?;
    let path = dir.join(DATA_FILE);
    let tmp = dir.join(format!(".{DATA_FILE}.partial"));
    let mut f = fs::File::create(&tmp).map_err(Error::io(&tmp))?;
    CsvWriter::new(&mut f)
        .include_header(true)
        .finish(&mut df)?;
    drop(f);
    fs::rename(&tmp, &path).map_err(Error::io(&path))?;
    let write = |name: &str, text: &str| -> Result<()> {
        let p = dir.join(name);
        fs::write(&p, text).map_err(Error::io(&p))
    };
    let csv = |name: &str, mut frame: DataFrame| -> Result<()> {
        let p = dir.join(name);
        let mut f = fs::File::create(&p).map_err(Error::io(&p))?;
        CsvWriter::new(&mut f)
            .include_header(true)
            .finish(&mut frame)?;
        Ok(())
    };
    csv(
        WORKFORCE_FILE,
        df!(
            "firm_id" => &tables.wf_firm,
            "fiscal_year" => &tables.wf_year,
            "employees" => &tables.wf_employees,
        )?,
    )?;
    csv(
        FIRMS_FILE,
        df!("firm_id" => &tables.firm, "listing" => &tables.listing)?,
    )?;
    csv(
        PRICES_FILE,
        df!("year" => &tables.price_year, "cpi" => &tables.price_index)?,
    )?;
    let mut corrections = String::from("entity,period,column,value,reason\n");
    for (firm, year, right) in &tables.corrections {
        corrections.push_str(&format!(
            "{firm},{year},employees,{right},headcount keyed with an extra zero (the annual report gives {right})\n"
        ));
    }
    write(CORRECTIONS_FILE, &corrections)?;
    write("rules.toml", RULES)?;
    write("rules_year_end.toml", RULES_YEAR_END)?;
    write("README.md", &readme(&planted, firms, periods, seed))?;
    write(
        "planted.json",
        &(serde_json::to_string_pretty(&planted)? + "\n"),
    )?;
    Ok(planted)
}
