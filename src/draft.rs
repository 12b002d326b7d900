//! `rules draft DATA`: a starter rules file guessed from the data. The period is a column of
//! whole numbers that look like years; the entity the text or integer column whose pairs with
//! the period are unique, or nearly (the share is written beside the guess); canonical
//! columns are guessed from common raw names. Every guess is a commented line to check.

use polars::prelude::*;

use crate::derive::Plan;
use crate::rules::{Rules, CANONICAL_COLUMNS};
use crate::{Error, Result};

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

fn normal(name: &str) -> String {
    name.chars()
        .filter(|c| c.is_ascii_alphanumeric())
        .flat_map(|c| c.to_lowercase())
        .collect()
}

/// Names that suggest a period column, and an entity column (common practice).
const PERIOD_HINTS: [&str; 6] = ["year", "fyear", "fiscal", "period", "yr", "jahr"];
const ENTITY_HINTS: [&str; 8] = [
    "firm", "company", "entity", "id", "code", "ticker", "isin", "name",
];

fn hinted(name: &str, hints: &[&str]) -> bool {
    let n = normal(name);
    hints.iter().any(|h| n.contains(h))
}

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
        let hint = hinted(name, &PERIOD_HINTS);
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
        let hint = hinted(name, &ENTITY_HINTS);
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
                    format!("; {} rows miss one of the two", rows - with_keys as usize)
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
    let period = guess_period(df).ok_or_else(|| Error::Unreadable {
        file: file_name.into(),
        at: String::new(),
        message: "no column of whole numbers between 1900 and 2100 to use as the period; \
                  write [panel] by hand"
            .into(),
    })?;
    let entity = guess_entity(df, &period.column)?.ok_or_else(|| Error::Unreadable {
        file: file_name.into(),
        at: String::new(),
        message: format!(
            "no text or integer column repeats over `{}` with (nearly) unique pairs; write \
             [panel] by hand",
            period.column
        ),
    })?;
    let names: Vec<String> = df
        .get_column_names()
        .iter()
        .map(|n| n.to_string())
        .collect();
    let mut mapping = Vec::new();
    for (canonical, synonyms) in SYNONYMS {
        let exact = names.iter().find(|n| normal(n) == normal(canonical));
        let guess = exact.or_else(|| {
            names
                .iter()
                .find(|n| synonyms.contains(&normal(n).as_str()))
        });
        if let Some(raw) = guess {
            if *raw != entity.column && *raw != period.column {
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
         period = {}   # guessed: {}\n\n",
        env!("CARGO_PKG_VERSION"),
        quote(&entity.column),
        entity.why,
        quote(&period.column),
        period.why,
    );
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
}
