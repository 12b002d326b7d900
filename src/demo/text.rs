//! The demo's rules files and the README of its data folder.

use super::*;

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

pub(super) fn readme(p: &Planted, firms: u32, periods: u32, seed: u64) -> String {
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
