//! The data dictionary's outputs: `dictionary.md`, `dictionary.json`, and the labels the
//! Parquet file carries (Arrow field metadata and key-value metadata).

use super::*;

/// `dictionary.json`: the data dictionary for programs.
#[derive(Serialize)]
pub(super) struct DictionaryFile<'a> {
    /// What the file is.
    about: &'static str,
    /// One entry per column of the cleaned panel, in column order.
    columns: &'a [crate::pipeline::DictionaryEntry],
}

impl<'a> DictionaryFile<'a> {
    pub(super) fn new(columns: &'a [crate::pipeline::DictionaryEntry]) -> Self {
        DictionaryFile {
            about: "panelready data dictionary: one entry per column of panel.parquet / panel.csv",
            columns,
        }
    }
}

/// Labels, units and definitions for the Parquet file: as field metadata in the Arrow schema
/// readers restore (`label`, `unit`, `definition`, `source` on each field; the `ARROW:schema`
/// key polars would write, with the metadata added), and in the file's key-value metadata:
/// `panelready.dictionary` holds dictionary.json, `panelready.column.NAME` each column's entry.
pub(super) fn parquet_labels(
    panel: &DataFrame,
    entries: &[crate::pipeline::DictionaryEntry],
) -> KeyValueMetadata {
    // The schema of the file: text held as codes is written as text.
    let schema: ArrowSchema = crate::core::spelled_out_schema(panel.schema())
        .to_arrow(CompatLevel::newest())
        .into_iter()
        .map(|(name, field)| {
            let entry = entries.iter().find(|e| e.name == name.as_str());
            let mut md = std::collections::BTreeMap::new();
            if let Some(e) = entry {
                for (k, v) in [
                    ("label", &e.label),
                    ("unit", &e.unit),
                    ("definition", &e.definition),
                    ("source", &e.source),
                ] {
                    if !v.is_empty() {
                        md.insert(PlSmallStr::from(k), PlSmallStr::from(v.as_str()));
                    }
                }
            }
            (name, field.with_metadata(md))
        })
        .collect();
    let arrow = polars_parquet::write::schema_to_metadata_key(&schema);
    let mut kv = Vec::new();
    if let Some(value) = arrow.value {
        kv.push((arrow.key, value));
    }
    kv.push((
        "panelready.dictionary".to_string(),
        serde_json::to_string(&DictionaryFile::new(entries)).unwrap_or_default(),
    ));
    for e in entries {
        kv.push((
            format!("panelready.column.{}", e.name),
            serde_json::to_string(e).unwrap_or_default(),
        ));
    }
    KeyValueMetadata::from_static(kv)
}

/// The data dictionary as Markdown: one row per column of the cleaned panel, then where each
/// column's values lie in it.
pub(super) fn dictionary_md(entries: &[crate::pipeline::DictionaryEntry]) -> String {
    let cell = |s: &str| s.replace('|', "\\|");
    let mut out = String::from(
        "# Data dictionary\n\nOne row per column of `panel.csv` / `panel.parquet`.\n\n\
         Cutoffs are rounded for reading; report.json has them in full precision.\n\n\
         | variable | type | label | definition | unit | source | missing in the cleaned panel | values changed by `build` |\n\
         |---|---|---|---|---|---|---:|---|\n",
    );
    for e in entries {
        out.push_str(&format!(
            "| `{}` | {} | {} | {} | {} | {} | {} | {} |\n",
            // A pipe splits a table's cell even inside backticks (GitHub's table syntax).
            cell(&e.name),
            e.kind,
            cell(&e.label),
            cell(&e.definition),
            cell(&e.unit),
            cell(&e.source),
            e.missing_share
                .map_or("–".into(), |s| format!("{:.1}%", s * 100.0)),
            cell(&e.treatment),
        ));
    }
    out.push_str(&keys_md(entries));
    let numbers: Vec<String> = entries
        .iter()
        .filter_map(|e| {
            let v = e.values.as_ref()?;
            let s = v.spread?;
            // A whole number as the column holds it (`2`, not `2.000`); other values, and a
            // percentile between two whole numbers, to four significant digits.
            let whole = e.kind == "whole number";
            let level = |x: f64| match whole && x.fract() == 0.0 && x.abs() < 1e15 {
                true => format!("{x:.0}"),
                false => crate::report::level(x),
            };
            Some(format!(
                "| `{}` | {} | {} | {} | {} | {} | {} |\n",
                cell(&e.name),
                v.n,
                level(s.min),
                level(s.p25),
                level(s.median),
                level(s.p75),
                level(s.max)
            ))
        })
        .collect();
    if !numbers.is_empty() {
        out.push_str(
            "\n## Where the values lie in the cleaned panel\n\n\
             | variable | n | smallest | 25th percentile | median | 75th percentile | largest |\n\
             |---|---:|---:|---:|---:|---:|---:|\n",
        );
        out.extend(numbers);
        out.push_str(
            "\nOver each variable's non-missing rows; percentiles by linear interpolation \
             (Hyndman-Fan type 7); to four significant digits (dictionary.json holds them in \
             full).\n",
        );
    }
    let text: Vec<String> = entries
        .iter()
        .filter_map(|e| {
            let v = e.values.as_ref()?;
            let t = v.text.as_ref()?;
            Some(format!(
                "| `{}` | {} | {} | {} | {:.1}% | {} |\n",
                cell(&e.name),
                v.n,
                t.distinct,
                cell(&t.most_common),
                100.0 * t.most_common_rows as f64 / v.n.max(1) as f64,
                t.entities_changing
            ))
        })
        .collect();
    if !text.is_empty() {
        out.push_str(
            "\n| variable | n | distinct values | most common | its share of n | entities \
             whose value changes |\n|---|---:|---:|---|---:|---:|\n",
        );
        out.extend(text);
        out.push_str(
            "\nText whose values repeat, and number codes declared categorical; text whose \
             values nearly all differ, such as a name, is not counted. An entity's value changes when it holds two or more \
             different values over its periods, missing ones aside.\n",
        );
    }
    out
}

/// The keys in words: the entities the entity key names, the periods the period key holds,
/// and the rows, each one entity in one period (the key steps leave no key twice).
fn keys_md(entries: &[crate::pipeline::DictionaryEntry]) -> String {
    use crate::report::layout::counted;
    let entity = entries.iter().find_map(|e| {
        let v = e.values.as_ref()?;
        Some((&e.name, v.entities?, v.n))
    });
    let period = entries
        .iter()
        .find_map(|e| Some((&e.name, e.values.as_ref()?.periods?)));
    let Some((entity, entities, rows)) = entity else {
        return String::new();
    };
    let periods = match period {
        Some((name, p)) if p.first == p.last => {
            format!(" and `{name}` 1 period, {}", p.first)
        }
        Some((name, p)) => format!(
            " and `{name}` {} from {} to {}",
            counted(p.periods, "period", "periods"),
            p.first,
            p.last
        ),
        None => String::new(),
    };
    let each = match rows {
        1 => "its one row is".to_string(),
        n => format!("each of the {n} rows is"),
    };
    format!(
        "\n## The keys\n\n`{entity}` names {}{periods}; {each} one entity in one period, \
         none twice.\n",
        counted(entities, "entity", "entities"),
    )
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::pipeline::{ColumnValues, DictionaryEntry, PeriodsObserved};
    use crate::report::{Spread, TextValues};

    fn entry(name: &str, kind: &str, values: ColumnValues) -> DictionaryEntry {
        DictionaryEntry {
            name: name.into(),
            label: String::new(),
            definition: "raw column".into(),
            unit: String::new(),
            source: "input file".into(),
            missing_share: Some(0.0),
            treatment: String::new(),
            kind: kind.into(),
            values: Some(values),
        }
    }

    /// Worked by hand: a head count's whole values as the column holds them (`2`, `40`), its
    /// median between two whole numbers to four significant digits; a ratio's values to four
    /// significant digits; a text's counts, its share of n to one decimal.
    #[test]
    fn the_dictionary_lays_out_where_values_lie() {
        let spread = |min, p25, median, p75, max| Spread {
            min,
            p25,
            median,
            p75,
            max,
        };
        let entries = [
            entry(
                "staff",
                "whole number",
                ColumnValues {
                    n: 4,
                    spread: Some(spread(2.0, 3.0, 10.5, 19.0, 40.0)),
                    text: None,
                    entities: None,
                    periods: None,
                },
            ),
            entry(
                "roa",
                "number",
                ColumnValues {
                    n: 3,
                    spread: Some(spread(-0.5, 0.0, 0.125, 2.0, 3.0)),
                    text: None,
                    entities: None,
                    periods: None,
                },
            ),
            entry(
                "sector",
                "text",
                ColumnValues {
                    n: 8,
                    spread: None,
                    text: Some(TextValues {
                        distinct: 3,
                        most_common: "Docks".into(),
                        most_common_rows: 5,
                        entities_changing: 1,
                    }),
                    entities: None,
                    periods: None,
                },
            ),
        ];
        let md = dictionary_md(&entries);
        assert!(
            md.contains("| `staff` | whole number |  | raw column |"),
            "{md}"
        );
        assert!(
            md.contains("| `staff` | 4 | 2 | 3 | 10.50 | 19 | 40 |"),
            "{md}"
        );
        assert!(
            md.contains("| `roa` | 3 | -0.5000 | 0 | 0.1250 | 2.000 | 3.000 |"),
            "{md}"
        );
        assert!(
            md.contains("| `sector` | 8 | 3 | Docks | 62.5% | 1 |"),
            "{md}"
        );
        assert!(!md.contains("## The keys"), "{md}");
    }

    /// Worked by hand: the keys' sentence, with a gap in the periods (4 of 2019..2024), with
    /// one period, and with one entity and one row.
    #[test]
    fn the_dictionary_names_the_keys_entities_and_periods() {
        let key = |name: &str, kind: &str, n, entities, periods| {
            entry(
                name,
                kind,
                ColumnValues {
                    n,
                    spread: None,
                    text: None,
                    entities,
                    periods,
                },
            )
        };
        let observed = |periods, first, last| PeriodsObserved {
            periods,
            first,
            last,
        };
        // The keys of a panel of `rows` rows naming `entities` entities in `periods`.
        let keys_md = |rows, entities, periods| {
            dictionary_md(&[
                key("firm", "text", rows, Some(entities), None),
                key("year", "whole number", rows, None, Some(periods)),
            ])
        };
        let md = keys_md(9, 3, observed(4, 2019, 2024));
        assert!(
            md.contains(
                "## The keys\n\n`firm` names 3 entities and `year` 4 periods from 2019 to \
                 2024; each of the 9 rows is one entity in one period, none twice.\n"
            ),
            "{md}"
        );
        let md = keys_md(1, 1, observed(1, 2020, 2020));
        assert!(
            md.contains("`firm` names 1 entity and `year` 1 period, 2020; its one row is one"),
            "{md}"
        );
    }
}
