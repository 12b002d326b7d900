//! Groups of rows by the values of some columns (industry x year, say), numbered in the
//! columns' order: what the outlier check and the treatment by groups read instead of a
//! group-by per variable.

use polars::prelude::*;

use crate::Result;

/// The fewest values a group needs for percentile cutoffs of its own at `lower` and `upper`:
/// 1 / (the smaller tail), 100 at 1 %. A smaller group takes the pooled cutoffs.
pub fn fewest_for_cutoffs(lower: f64, upper: f64) -> usize {
    (1.0 / lower.min(1.0 - upper)).ceil() as usize
}

/// The groups of some columns: their values, one row a group sorted by the columns, and each
/// row's group, its place in that table; rows with a missing value in any of the columns are
/// in a last group of their own (`loose`, numbered `table.height()`).
pub struct GroupCodes {
    pub table: DataFrame,
    pub codes: Vec<u32>,
}

impl GroupCodes {
    /// The groups of `columns` in `df`: one group-by of the columns alone, its groups then put
    /// in the columns' order and each row given its group's place (no join of the rows onto
    /// the table).
    pub fn of(df: &DataFrame, columns: &[String]) -> Result<GroupCodes> {
        let by = df.group_by(columns)?;
        // The groups' values with their number in the group-by, those with every value there
        // sorted: a group's place in the table.
        let grouped = columns
            .iter()
            .fold(lit(true), |acc, g| acc.and(col(g.as_str()).is_not_null()));
        let sorted = DataFrame::new_infer_height(by.keys())?
            .lazy()
            .with_row_index("__group", None)
            .filter(grouped)
            .sort(
                columns.iter().map(String::as_str).collect::<Vec<_>>(),
                Default::default(),
            )
            .collect()?;
        let order = sorted.column("__group")?.idx()?.clone();
        let loose = sorted.height() as u32;
        let mut place = vec![loose; by.get_groups().len()];
        for (t, g) in order.into_no_null_iter().enumerate() {
            place[g as usize] = t as u32;
        }
        let mut codes = vec![loose; df.height()];
        match &**by.get_groups() {
            GroupsType::Idx(groups) => {
                for (g, rows) in groups.all().iter().enumerate() {
                    for r in rows.iter() {
                        codes[*r as usize] = place[g];
                    }
                }
            }
            GroupsType::Slice { groups, .. } => {
                for (g, [first, len]) in groups.iter().enumerate() {
                    let rows = *first as usize..(*first + *len) as usize;
                    codes[rows].fill(place[g]);
                }
            }
        }
        Ok(GroupCodes {
            table: sorted.drop("__group")?,
            codes,
        })
    }

    /// The group of the rows with a missing grouping value.
    pub fn loose(&self) -> usize {
        self.table.height()
    }

    /// How many groups the codes count, the loose one included.
    pub fn count(&self) -> usize {
        self.table.height() + 1
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Worked by hand: the groups in the columns' order (text, then the year), each row's
    /// place among them, and the rows with a missing value in the last, loose group.
    #[test]
    fn rows_get_their_groups_place_in_the_sorted_table() -> Result<()> {
        let df = df!(
            "sector" => [Some("S2"), Some("S1"), None, Some("S2"), Some("S1"), Some("S1")],
            "year" => [Some(2021i64), Some(2021), Some(2020), Some(2020), None, Some(2021)],
        )?;
        let groups = GroupCodes::of(&df, &["sector".to_string(), "year".to_string()])?;
        let expected = df!(
            "sector" => ["S1", "S2", "S2"],
            "year" => [2021i64, 2020, 2021],
        )?;
        assert!(groups.table.equals(&expected), "{}", groups.table);
        assert_eq!(groups.codes, [2, 0, 3, 1, 3, 0]);
        assert_eq!((groups.loose(), groups.count()), (3, 4));
        Ok(())
    }
}
