//! The data dictionary's entries: one per column of the cleaned panel.

use super::*;

/// The entries; a `null` rule's cells are counted in the corrections ledger (`corrections`).
pub(super) fn dictionary(
    panel: &DataFrame,
    report: &Report,
    input: &InputConfig,
    raw: &[String],
    corrections: &[repair::LedgerPart],
) -> Result<Vec<DictionaryEntry>> {
    // The ledger's lines per column and reason, from the parts held as lines (winsorizing's
    // name no rule): a few groups, however many lines.
    let mut ledger_lines: std::collections::BTreeMap<(String, String), u64> = Default::default();
    for part in corrections {
        let rows = &part.rows;
        if !(rows.schema().contains("column") && rows.schema().contains("reason")) {
            continue;
        }
        let counts = rows
            .clone()
            .lazy()
            .group_by([col("column"), col("reason")])
            .agg([len().cast(DataType::UInt64).alias("n")])
            .collect()?;
        let (c, r, n) = (
            counts.column("column")?.str()?,
            counts.column("reason")?.str()?,
            counts.column("n")?.u64()?,
        );
        for ((c, r), n) in c.iter().zip(r.iter()).zip(n.iter()) {
            if let (Some(c), Some(r), Some(n)) = (c, r, n) {
                *ledger_lines
                    .entry((c.to_string(), r.to_string()))
                    .or_default() += n;
            }
        }
    }
    let lines_of = |column: &str, reason: &str| {
        ledger_lines
            .get(&(column.to_string(), reason.to_string()))
            .copied()
            .unwrap_or(0)
    };
    let canonical: std::collections::BTreeMap<&String, &String> = input
        .rules
        .file
        .columns
        .iter()
        .map(|(c, r)| (r, c))
        .collect();
    let findings = report
        .cleaned
        .as_ref()
        .map_or(&report.findings, |c| &c.findings);
    let lines = findings
        .get::<crate::report::MissingFigures>()
        .map_or(&[][..], |f| &f.lines);
    let missing = |name: &str| lines.iter().find(|m| m.variable == name).map(|m| m.share);
    // Where values lie: the Variation section's lines for the cleaned panel.
    let variation = findings
        .get::<VariationFigures>()
        .map_or(&[][..], |f| &f.lines);
    // The keys: the panel at a glance (of the cleaned panel, as handed over).
    let glance = report.cleaned.as_ref().map_or(&report.panel, |c| &c.panel);
    let values = |name: &str| {
        let key = ColumnValues {
            n: glance.rows,
            spread: None,
            text: None,
            entities: None,
            periods: None,
        };
        if name == input.entity {
            return Some(ColumnValues {
                entities: Some(glance.entities),
                ..key
            });
        }
        if name == input.period {
            let periods = glance
                .first_period
                .zip(glance.last_period)
                .map(|(first, last)| PeriodsObserved {
                    periods: glance.periods,
                    first,
                    last,
                });
            return Some(ColumnValues { periods, ..key });
        }
        let line = variation.iter().find(|l| l.variable == name)?;
        (line.spread.is_some() || line.text_values.is_some()).then(|| ColumnValues {
            n: line.n,
            spread: line.spread,
            text: line.text_values.clone(),
            entities: None,
            periods: None,
        })
    };
    let schema = crate::core::spelled_out_schema(panel.schema());
    Ok(panel
        .get_column_names()
        .iter()
        .map(|n| n.to_string())
        .map(|name| {
            let derived = report.derived.iter().find(|d| d.name == name);
            let treatment = report
                .treatment
                .iter()
                .find(|t| t.variable == name)
                .map(|t| {
                    let cuts = if t.cutoffs.len() == 1 {
                        let c = &t.cutoffs[0];
                        format!(
                            "cutoffs {} and {}",
                            c.lower.map_or("–".into(), crate::report::level),
                            c.upper.map_or("–".into(), crate::report::level)
                        )
                    } else if !t.groups.is_empty() {
                        format!(
                            "cutoffs per group of {} in report.json",
                            t.groups.join(" × ")
                        )
                    } else {
                        "cutoffs per period in report.json".to_string()
                    };
                    let listed = match t.method.as_str() {
                        "winsorize" if t.below + t.above > 0 => {
                            "; each value replaced is in corrections.csv"
                        }
                        _ => "",
                    };
                    format!(
                        "{} at percentiles {} / {} ({}); {} below, {} above{listed}",
                        t.method, t.lower_percentile, t.upper_percentile, cuts, t.below, t.above
                    )
                })
                .unwrap_or_default();
            let nulled: Vec<String> = report
                .rules
                .iter()
                .filter(|l| l.nulls.contains(&name))
                .map(|l| {
                    (
                        l,
                        lines_of(&name, &accounting::not_holding(&l.name, &l.expr)),
                    )
                })
                .filter(|(_, n)| *n > 0)
                .map(|(l, n)| {
                    format!(
                        "set to null where rule `{}` does not hold ({n} rows, each in \
                         corrections.csv)",
                        l.name
                    )
                })
                .collect();
            let treatment = [treatment]
                .into_iter()
                .chain(nulled)
                .filter(|t| !t.is_empty())
                .collect::<Vec<_>>()
                .join("; ");
            let (definition, unit, source) = match derived {
                Some(d) => (
                    format!("derived: `{}`", d.expr),
                    d.unit.clone(),
                    d.source.clone(),
                ),
                None if raw.contains(&name) => (
                    match canonical.get(&name) {
                        Some(c) => format!("raw column (canonical `{c}`)"),
                        None if name == input.entity => "raw column: the entity key".to_string(),
                        None if name == input.period => "raw column: the period key".to_string(),
                        None => "raw column".to_string(),
                    },
                    String::new(),
                    "input file".to_string(),
                ),
                None => match report.joins.iter().find(|j| j.columns.contains(&name)) {
                    Some(j) => (
                        format!("joined from `{}` on {}", j.file, j.on.join(", ")),
                        String::new(),
                        j.file.clone(),
                    ),
                    None => (
                        "row number in the input file (1 = first data row)".to_string(),
                        String::new(),
                        "panelready".to_string(),
                    ),
                },
            };
            DictionaryEntry {
                missing_share: missing(&name),
                kind: schema.get(&name).map_or_else(String::new, kind),
                values: values(&name),
                label: derived.map(|d| d.label.clone()).unwrap_or_default(),
                name,
                definition,
                unit,
                source,
                treatment,
            }
        })
        .collect())
}

/// A column's type in words, for readers who do not know the engine's names.
fn kind(dtype: &DataType) -> String {
    match dtype {
        d if d.is_integer() => "whole number".into(),
        d if d.is_float() => "number".into(),
        DataType::String => "text".into(),
        DataType::Boolean => "yes/no".into(),
        DataType::Date => "date".into(),
        DataType::Datetime(..) => "date and time".into(),
        d => d.to_string(),
    }
}
