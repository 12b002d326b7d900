//! `rules draft DATA`: a starter rules file guessed from the data. The period is a column of
//! whole numbers that look like years; the entity the text or integer column whose pairs with
//! the period are unique, or nearly (the share is written beside the guess); canonical
//! columns are guessed from common raw names. Every guess is a commented line to check.

use polars::prelude::*;

use crate::derive::Plan;
use crate::rules::{name_suggests, plain_name, Rules, CANONICAL_COLUMNS};
use crate::{Error, Result};
use year_end::{guess_year_end, unused_name, YEAR_END_CUTOFF};

mod year_end;

/// Common raw names of each canonical column, compared after lowercasing and dropping every
/// character that is not a letter or digit (common practice in firm-accounts files).
const SYNONYMS: [(&str, &[&str]); 10] = [
    (
        "total_assets",
        &[
            "totalassets",
            "assetstotal",
            "assets",
            "ta",
            "totassets",
            "assetstot",
            "sumofassets",
        ],
    ),
    (
        "sales",
        &[
            "sales",
            "revenue",
            "revenues",
            "turnover",
            "netsales",
            "totalrevenue",
            "salesrevenue",
        ],
    ),
    (
        "net_income",
        &[
            "netincome",
            "netprofit",
            "profit",
            "earnings",
            "ni",
            "netearnings",
            "profitaftertax",
        ],
    ),
    (
        "ebit",
        &[
            "ebit",
            "opprofit",
            "operatingprofit",
            "operatingincome",
            "opincome",
        ],
    ),
    (
        "interest_expense",
        &[
            "interestexpense",
            "interestpaid",
            "interest",
            "intexp",
            "interestexpenses",
        ],
    ),
    (
        "rd_expense",
        &[
            "rdexpense",
            "rnd",
            "rndspend",
            "rd",
            "researchanddevelopment",
            "rdspend",
            "rdexpenses",
        ],
    ),
    (
        "current_assets",
        &["currentassets", "curassets", "ca", "totalcurrentassets"],
    ),
    (
        "current_liabilities",
        &[
            "currentliabilities",
            "curliabilities",
            "cl",
            "totalcurrentliabilities",
        ],
    ),
    (
        "short_term_debt",
        &[
            "shorttermdebt",
            "debtshort",
            "stdebt",
            "shortdebt",
            "currentdebt",
        ],
    ),
    (
        "long_term_debt",
        &[
            "longtermdebt",
            "debtlong",
            "ltdebt",
            "longdebt",
            "noncurrentdebt",
        ],
    ),
];

/// Names that suggest a period column, and an entity column (common practice).
const PERIOD_HINTS: [&str; 6] = ["year", "fyear", "fiscal", "period", "yr", "jahr"];
const ENTITY_HINTS: [&str; 8] = [
    "firm", "company", "entity", "id", "code", "ticker", "isin", "name",
];

/// A guessed key with what the guess rests on.
struct Guess {
    column: String,
    why: String,
    /// Rows that repeat a key (entity guesses only).
    repeats: u64,
}

/// The column's values as whole numbers, where every non-missing value is one.
fn whole_numbers(df: &DataFrame, name: &str) -> Option<Column> {
    let c = df.column(name).ok()?;
    let as_int = match c.dtype() {
        DataType::String => c
            .str()
            .ok()?
            .clone()
            .into_series()
            .strict_cast(&DataType::Int64)
            .ok()?
            .into_column(),
        d if d.is_integer() => c.cast(&DataType::Int64).ok()?,
        d if d.is_float() => {
            let f = c.cast(&DataType::Float64).ok()?;
            let whole = f.f64().ok()?.iter().flatten().all(|x| x.fract() == 0.0);
            if !whole {
                return None;
            }
            f.cast(&DataType::Int64).ok()?
        }
        _ => return None,
    };
    (as_int.null_count() < as_int.len()).then_some(as_int)
}

fn guess_period(df: &DataFrame) -> Option<Guess> {
    let mut best: Option<(bool, usize, Guess)> = None;
    for name in df.get_column_names() {
        let Some(c) = whole_numbers(df, name) else {
            continue;
        };
        let values: Vec<i64> = c.i64().ok()?.iter().flatten().collect();
        let yearlike = values.iter().filter(|v| (1900..=2100).contains(*v)).count();
        if (yearlike as f64) < 0.99 * values.len() as f64 {
            continue;
        }
        let distinct = {
            let mut v = values.clone();
            v.sort_unstable();
            v.dedup();
            v.len()
        };
        let hint = name_suggests(name, &PERIOD_HINTS);
        let (lo, hi) = (
            values.iter().min().copied().unwrap_or(0),
            values.iter().max().copied().unwrap_or(0),
        );
        let guess = Guess {
            column: name.to_string(),
            why: format!(
                "whole numbers that look like years ({lo}..{hi}, {distinct} distinct){}",
                if hint {
                    "; the name suggests a period"
                } else {
                    ""
                }
            ),
            repeats: 0,
        };
        // A name hint first, then the column with the fewest distinct values.
        let better = match &best {
            None => true,
            Some((h, d, _)) => (hint, std::cmp::Reverse(distinct)) > (*h, std::cmp::Reverse(*d)),
        };
        if better {
            best = Some((hint, distinct, guess));
        }
    }
    best.map(|(_, _, g)| g)
}

/// Names that suggest number codes of a classification (common practice: industry codes
/// such as SIC, NAICS or NACE, countries, regions).
const CATEGORY_HINTS: [&str; 10] = [
    "sic", "naics", "nace", "isic", "industry", "sector", "country", "region", "category", "class",
];

/// Columns of whole numbers that by their name are codes of categories, besides `keys`: each
/// with two or more distinct values, and at most one in sixteen rows (the share at which the
/// loader holds text as codes, `core::text`: values that repeat, not an identifier).
fn guess_categories(df: &DataFrame, keys: &[&str]) -> Result<Vec<String>> {
    let mut found = Vec::new();
    for name in df.get_column_names() {
        let c = df.column(name)?;
        if keys.contains(&name.as_str()) || !c.dtype().is_integer() {
            continue;
        }
        if !name_suggests(name, &CATEGORY_HINTS) {
            continue;
        }
        let distinct = c.drop_nulls().n_unique()?;
        if distinct >= 2 && distinct * 16 <= c.len() {
            found.push(name.to_string());
        }
    }
    Ok(found)
}

fn guess_entity(df: &DataFrame, period: &str) -> Result<Option<Guess>> {
    let rows = df.height();
    let mut best: Option<((bool, bool, u64), Guess)> = None;
    for name in df.get_column_names() {
        if name.as_str() == period {
            continue;
        }
        let dtype = df.column(name)?.dtype().clone();
        if !(dtype == DataType::String || dtype.is_integer()) {
            continue;
        }
        let stats = df
            .clone()
            .lazy()
            .filter(
                col(name.as_str())
                    .is_not_null()
                    .and(col(period).is_not_null()),
            )
            .select([
                len().cast(DataType::UInt64).alias("rows"),
                col(name.as_str())
                    .n_unique()
                    .cast(DataType::UInt64)
                    .alias("entities"),
                as_struct(vec![col(name.as_str()), col(period)])
                    .n_unique()
                    .cast(DataType::UInt64)
                    .alias("pairs"),
            ])
            .collect()?;
        let get = |c: &str| -> Result<u64> { Ok(stats.column(c)?.u64()?.get(0).unwrap_or(0)) };
        let (with_keys, entities, pairs) = (get("rows")?, get("entities")?, get("pairs")?);
        if with_keys == 0 || entities < 2 {
            continue;
        }
        let share = pairs as f64 / with_keys as f64;
        // An entity repeats over periods; a row identifier does not.
        let repeats = (entities as f64) <= 0.8 * with_keys as f64;
        if share < 0.99 || !repeats {
            continue;
        }
        let hint = name_suggests(name, &ENTITY_HINTS);
        let repeated = with_keys - pairs;
        let guess = Guess {
            column: name.to_string(),
            why: format!(
                "{entities} entities; with `{period}` the pairs are unique on {pairs} of {with_keys} \
                 rows with both ({:.1}%{}){}{}",
                100.0 * share,
                if repeated > 0 {
                    format!("; {repeated} rows repeat a pair: see the Keys section")
                } else {
                    String::new()
                },
                if hint { "; the name suggests an entity" } else { "" },
                if (with_keys as usize) < rows {
                    format!(
                        "; {} one of the two",
                        crate::report::layout::counted(
                            (rows - with_keys as usize) as u64,
                            "row misses",
                            "rows miss"
                        )
                    )
                } else {
                    String::new()
                }
            ),
            repeats: repeated,
        };
        let key = (share == 1.0, hint, u64::MAX - entities);
        if best.as_ref().is_none_or(|(k, _)| key > *k) {
            best = Some((key, guess));
        }
    }
    Ok(best.map(|(_, g)| g))
}

fn quote(s: &str) -> String {
    format!("\"{}\"", s.replace('\\', "\\\\").replace('"', "\\\""))
}

/// The draft rules file for `df`, read from `file_name`.
pub fn draft(df: &DataFrame, file_name: &str) -> Result<String> {
    // A column of years; else, or when no entity repeats over it (a founding year), fiscal
    // years from a column of year-end dates, under a new name.
    let by_dates = guess_year_end(df).map(|(year_end, fiscal)| {
        let name = unused_name(df);
        let mut keyed = df.clone();
        let period = Guess {
            column: name.clone(),
            why: format!(
                "the fiscal year, derived from `{}` (year_end below)",
                year_end.column
            ),
            repeats: 0,
        };
        keyed.with_column(fiscal.with_name(name.as_str().into()).into_column())?;
        PolarsResult::Ok((period, Some(year_end), keyed))
    });
    let candidates: Vec<(Guess, Option<Guess>, DataFrame)> = guess_period(df)
        .map(|period| Ok((period, None, df.clone())))
        .into_iter()
        .chain(by_dates)
        .collect::<PolarsResult<_>>()?;
    let Some(first) = candidates.first().map(|c| c.0.column.clone()) else {
        return Err(Error::Unreadable {
            file: file_name.into(),
            at: String::new(),
            message: "no column of whole numbers between 1900 and 2100, nor of year-end dates \
                      YYYY-MM-DD, to use as the period; write [panel] by hand"
                .into(),
        });
    };
    let mut chosen = None;
    for (period, year_end, keyed) in candidates {
        if let Some(entity) = guess_entity(&keyed, &period.column)? {
            chosen = Some((entity, period, year_end, keyed));
            break;
        }
    }
    let (entity, period, year_end, keyed) = chosen.ok_or_else(|| Error::Unreadable {
        file: file_name.into(),
        at: String::new(),
        message: format!(
            "no text or integer column repeats over `{first}` with (nearly) unique pairs; write \
             [panel] by hand"
        ),
    })?;
    let df = &keyed;
    let names: Vec<String> = df
        .get_column_names()
        .iter()
        .map(|n| n.to_string())
        .collect();
    let mut mapping = Vec::new();
    for (canonical, synonyms) in SYNONYMS {
        let exact = names
            .iter()
            .find(|n| plain_name(n) == plain_name(canonical));
        let guess = exact.or_else(|| {
            names
                .iter()
                .find(|n| synonyms.contains(&plain_name(n).as_str()))
        });
        if let Some(raw) = guess {
            let year_end = year_end.as_ref().map(|g| g.column.as_str());
            if *raw != entity.column && *raw != period.column && Some(raw.as_str()) != year_end {
                mapping.push((canonical, raw.clone()));
            }
        }
    }
    let mut out = format!(
        "# Starter rules for `{file_name}`, drafted by panelready {} from the data.\n\
         # Every guess below is a comment to check; edit, then run\n\
         #   panelready build {file_name} --rules THIS_FILE --out bundle\n\n\
         include = [\"standard\"]   # the built-in ratio library (`panelready ratios`)\n\n\
         [panel]\n\
         entity = {}   # guessed: {}\n\
         period = {}   # guessed: {}\n",
        env!("CARGO_PKG_VERSION"),
        quote(&entity.column),
        entity.why,
        quote(&period.column),
        period.why,
    );
    if let Some(y) = &year_end {
        out.push_str(&format!(
            "year_end = {}   # guessed: {}\n\
             year_end_cutoff = {YEAR_END_CUTOFF}   # a year ending in month {YEAR_END_CUTOFF} or \
             earlier is the previous fiscal year\n#   (common practice); 0 keeps the calendar \
             year\n",
            quote(&y.column),
            y.why
        ));
    }
    let keys = [
        entity.column.as_str(),
        period.column.as_str(),
        year_end.as_ref().map_or("", |y| y.column.as_str()),
    ];
    let categories = guess_categories(df, &keys)?;
    if !categories.is_empty() {
        let names: Vec<String> = categories.iter().map(|c| quote(c)).collect();
        out.push_str(&format!(
            "categorical = [{}]   # guessed from the names: whole numbers that code categories \
             (an industry,\n#   a country), never averaged or winsorized; take out any that \
             are amounts\n",
            names.join(", ")
        ));
    }
    out.push('\n');
    out.push_str("[columns]   # canonical name = your column\n");
    for (canonical, raw) in &mapping {
        out.push_str(&format!(
            "{canonical} = {}   # guessed from the column name\n",
            quote(raw)
        ));
    }
    let missing: Vec<&str> = CANONICAL_COLUMNS
        .iter()
        .copied()
        .filter(|c| !mapping.iter().any(|(m, _)| m == c))
        .collect();
    if !missing.is_empty() {
        out.push_str(&format!(
            "# not found (map them if your data has them): {}\n",
            missing.join(", ")
        ));
    }
    // Which ratios the library can compute with this mapping.
    let text = format!("{out}\n");
    let rules = Rules::from_text(None, text)?;
    let plan = Plan::new(&rules, &names)?;
    let computable: Vec<String> = plan.vars.iter().map(|v| v.name.clone()).collect();
    out.push_str(&format!(
        "\n# Ratios the standard library can compute with these columns: {}.\n",
        if computable.is_empty() {
            "none".to_string()
        } else {
            computable.join(", ")
        }
    ));
    for s in &plan.skipped {
        out.push_str(&format!(
            "# Left out: {} (needs `{}`).\n",
            s.name, s.missing
        ));
    }
    out.push_str(
        "\n# Your own derived variables, for example:\n\
         # [derive.cash_assets]\n\
         # expr = \"cash / total_assets\"\n\
         # label = \"Cash over total assets\"\n\n\
         [clean]\n",
    );
    out.push_str(if entity.repeats > 0 {
        "duplicates = \"keep-first\"   # some keys repeat in this file: keep-first keeps the first \
         row of each\n#   and lists the others in the ledger; choose deliberately: fail, keep-last, \
         drop-all,\n#   prefer-max:COLUMN, prefer-min:COLUMN\n"
    } else {
        "duplicates = \"fail\"   # stop on a key with different values; or keep-first, keep-last, \
         drop-all,\n#   prefer-max:COLUMN, prefer-min:COLUMN\n"
    });
    out.push_str(
        "# winsorize = { variables = [\"roa\", \"leverage\"], lower = 0.01, upper = 0.99, by = \"pooled\" }\n\
         # drop_singletons = true\n\
         # balance = \"largest\"\n\n\
         # [model]\n\
         # outcome = \"roa\"\n\
         # regressors = [\"size\", \"leverage\"]\n",
    );
    out.push_str(&format!(
        "# effects = [{}]   # add {} for period effects\n",
        quote(&entity.column),
        quote(&period.column)
    ));
    Ok(out)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn keys_and_columns_are_guessed_from_an_unfamiliar_file() {
        // A hand-made file: 3 firms x 2 years, a row number that must not pass for an entity.
        let df = df!(
            "company_code" => ["A", "A", "B", "B", "C", "C"],
            "yr" => [2001i64, 2002, 2001, 2002, 2001, 2002],
            "row_id" => [1i64, 2, 3, 4, 5, 6],
            "Total Assets" => [1.0, 2.0, 3.0, 4.0, 5.0, 6.0],
            "turnover" => [1.0, 2.0, 3.0, 4.0, 5.0, 6.0],
        )
        .unwrap();
        let text = draft(&df, "x.csv").unwrap();
        assert!(text.contains("entity = \"company_code\""), "{text}");
        assert!(text.contains("period = \"yr\""), "{text}");
        assert!(text.contains("total_assets = \"Total Assets\""), "{text}");
        assert!(text.contains("sales = \"turnover\""), "{text}");
        assert!(text.contains("unique on 6 of 6 rows"), "{text}");
        let rules = Rules::from_text(None, text).unwrap();
        assert_eq!(rules.file.panel.entity.as_deref(), Some("company_code"));
    }

    /// Worked by hand: an industry code and a country code, whole numbers that repeat, are
    /// drafted as categories; a head count (no such name) and a code column with a value on
    /// nearly every row (an identifier) are not.
    #[test]
    fn number_codes_named_as_categories_are_drafted_categorical() {
        let n = 64;
        let df = df!(
            "firm" => (0..n).map(|i| format!("F{}", i / 4)).collect::<Vec<_>>(),
            "year" => (0..n).map(|i| 2001 + (i % 4) as i64).collect::<Vec<_>>(),
            "sic_code" => (0..n).map(|i| [2834i64, 3571, 6021][i % 3]).collect::<Vec<_>>(),
            "country" => (0..n).map(|i| 276 + (i % 2) as i64).collect::<Vec<_>>(),
            "employees" => (0..n).map(|i| [10i64, 20][i % 2]).collect::<Vec<_>>(),
            "industry_id" => (0..n as i64).collect::<Vec<_>>(),
        )
        .unwrap();
        let text = draft(&df, "x.csv").unwrap();
        assert!(
            text.contains("categorical = [\"sic_code\", \"country\"]"),
            "{text}"
        );
        let rules = Rules::from_text(None, text).unwrap();
        assert_eq!(
            rules.file.panel.categorical,
            Some(vec!["sic_code".to_string(), "country".to_string()])
        );
    }

    /// Worked by hand: no column of years but a founding year, constant within each firm, so
    /// no entity repeats over it; the fiscal year then comes from the year-end dates (B's
    /// March year ends are the previous fiscal year), under a name the file does not use.
    /// Dates in another form, or a day the month does not have, are not dates.
    #[test]
    fn without_a_year_column_the_fiscal_year_comes_from_year_end_dates() {
        let df = df!(
            "firm" => ["A", "A", "B", "B"],
            "founded" => [1990i64, 1990, 1985, 1985],
            "fiscal_year" => ["x", "y", "z", "w"],
            // Named as year ends too, and before `fye`, but not dates as `build` reads them:
            // day first; a 30 February.
            "end_date" => ["31/12/2001", "31/12/2002", "31/03/2002", "31/03/2003"],
            "date" => ["2001-12-31", "2002-02-30", "2002-03-31", "2003-03-31"],
            "fye" => ["2001-12-31", "2002-12-31", "2002-03-31", "2003-03-31"],
        )
        .unwrap();
        let text = draft(&df, "x.csv").unwrap();
        for want in [
            "entity = \"firm\"",
            "period = \"fiscal_year_2\"",
            "year_end = \"fye\"",
            "fiscal years 2001..2002",
        ] {
            assert!(text.contains(want), "lacks {want}:\n{text}");
        }
        let rules = Rules::from_text(None, text).unwrap();
        assert_eq!(rules.file.panel.year_end.as_deref(), Some("fye"));
    }
}
