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

mod tables;
mod text;

pub use tables::PlantedTables;
use tables::{plant_table_defects, year_end_dates, Tables, LISTINGS};
use text::readme;
pub use text::{RULES, RULES_YEAR_END};

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
