//! Columns that changed their name between vintages: a column only in the old vintage whose
//! values a column only in the new one holds, firm-year by firm-year. Data providers rename
//! fields between downloads; the comparison then shows a column removed and one added, and
//! the cells under both names go unchecked.

use super::*;

/// A column only in the old vintage and one only in the new holding the same values.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct SameValues {
    /// Its name in the old vintage.
    pub old: String,
    /// Its name in the new vintage.
    pub new: String,
}

/// What a column must share with another to hold the same values: its missing cells and,
/// for numbers, its extremes (compared within the tolerance); and whether its values vary
/// (two columns of one value alike, dummies both always 1, say nothing of a new name).
struct Outline {
    missing: usize,
    range: Option<(f64, f64)>,
    varies: bool,
}

impl Outline {
    fn of(column: &Column) -> Result<Outline> {
        let (range, varies) = match numeric(column.dtype()) {
            true => {
                let x = column.cast(&DataType::Float64)?;
                let range = x.f64()?.min().zip(x.f64()?.max());
                (range, range.is_some_and(|(lo, hi)| lo < hi))
            }
            false => (None, column.drop_nulls().n_unique()? > 1),
        };
        Ok(Outline {
            missing: column.null_count(),
            range,
            varies,
        })
    }
}

/// Each column only in the old vintage (`removed`) paired with the first column only in the
/// new (`added`) that holds its values on every firm-year in both: missing in the same
/// firm-years, numbers within the tolerance (the old name's), text alike exactly; a column
/// whose values do not vary is not paired. Each column is in one pair at most. Columns are read one or two at a time: first each one's missing
/// cells and extremes, then the pairs those allow, cell by cell.
pub(super) fn same_values(
    removed: &[String],
    added: &[String],
    old: &Matched,
    new: &Matched,
    tolerance: &Tolerance,
) -> Result<Vec<SameValues>> {
    if removed.is_empty() || added.is_empty() || old.at.is_empty() {
        return Ok(Vec::new());
    }
    let outline = |side: &Matched, names: &[String]| -> Result<Vec<Outline>> {
        names
            .iter()
            .map(|c| Outline::of(&side.column(c)?))
            .collect()
    };
    let (old_outlines, new_outlines) = (outline(old, removed)?, outline(new, added)?);
    let mut taken = vec![false; added.len()];
    let mut pairs = Vec::new();
    for (r, o) in removed.iter().zip(&old_outlines) {
        let (abs, rel) = tolerance.of(r);
        let within = |a: f64, b: f64| (b - a).abs() <= abs + rel * a.abs();
        for (j, (a, n)) in added.iter().zip(&new_outlines).enumerate() {
            let alike = match (o.range, n.range) {
                (Some((lo, hi)), Some((lo2, hi2))) => within(lo, lo2) && within(hi, hi2),
                (None, None) => true,
                _ => false,
            };
            if taken[j] || !o.varies || o.missing != n.missing || !alike {
                continue;
            }
            let (x, y) = (old.column(r)?, new.column(a)?);
            let same = match o.range {
                Some(_) => !cells::numbers_changed(&x, &y, abs, rel)?.any(),
                None => {
                    let (x, y) = (x.cast(&DataType::String)?, y.cast(&DataType::String)?);
                    x.as_materialized_series()
                        .equal_missing(y.as_materialized_series())?
                        .all()
                }
            };
            if same {
                taken[j] = true;
                pairs.push(SameValues {
                    old: r.clone(),
                    new: a.clone(),
                });
                break;
            }
        }
    }
    Ok(pairs)
}
