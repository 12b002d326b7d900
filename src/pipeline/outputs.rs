//! Stage 8, what the bundle needs: the rejects ledger in row order (with the joined tables'
//! rows under their own names), bookkeeping columns given their output names, the data
//! dictionary and the joined files' records.

use super::*;

/// Assemble what `build` writes (and `audit` reports) from the finished stages.
pub(super) fn outputs(
    sample: Sample,
    report: Report,
    read: Read,
    plan: &Plan,
    corrections: Vec<repair::LedgerPart>,
    join_ledgers: Vec<DataFrame>,
    input: &InputConfig,
) -> Result<Prepared> {
    let Sample {
        mut panel, ledger, ..
    } = sample;
    let mut ledger = ledger.into_iter();
    let mut rejected = ledger
        .next()
        .expect("the key steps always return ledger parts");
    for part in ledger {
        rejected.vstack_mut(&part)?;
    }
    let rejected_main = rejected.height() as u64;
    // In row order: the order found here, the rows gathered in it as the file is written (a
    // step such as balancing may move most of the panel, and a sorted copy of every column
    // would hold it twice); with joined tables, their rows after the main file's, sorted.
    let (mut rejected, rejected_order) = if read.tables.is_empty() {
        let rows = rejected.column(ROW)?.as_materialized_series();
        let order = rows.arg_sort(SortOptions::default());
        (rejected, Some(order))
    } else {
        let rejected = assemble::ledger(rejected, &report.input.path, join_ledgers)?;
        (rejected, None)
    };
    let mut taken: Vec<String> = read.columns.clone();
    taken.extend(plan.vars.iter().map(|v| v.name.clone()));
    for (internal, base) in [
        (ROW, "source_row"),
        (clean::STEP, "step"),
        (clean::REASON, "reason"),
        (clean::RELATED, "related_row"),
        (assemble::FILE, "source_file"),
    ] {
        let name = output_name(base, &taken);
        if internal == ROW {
            panel.rename(internal, name.as_str().into())?;
        }
        if rejected.schema().contains(internal) {
            rejected.rename(internal, name.as_str().into())?;
        }
    }
    let dictionary = dictionary(&panel, &report, input, &read.loaded.columns, &corrections)?;
    let joined_files = read
        .tables
        .iter()
        .zip(&report.joins)
        .map(|(t, line)| JoinedFile {
            path: t.path.clone(),
            sha256: t.sha256.clone(),
            rows: t.rows,
            ledger_rows: line.rows - line.rows_used,
        })
        .collect();
    Ok(Prepared {
        report,
        panel,
        rejected,
        rejected_order,
        corrections,
        corrections_file: read.corrections.map(|c| (c.path, c.sha256)),
        dictionary,
        rejected_main,
        joined_files,
    })
}

/// The output name for a bookkeeping column: `base`, or `base_2`, `base_3`, ... when the
/// data already has a column of that name.
fn output_name(base: &str, taken: &[String]) -> String {
    std::iter::once(base.to_string())
        .chain((2..).map(|n| format!("{base}_{n}")))
        .find(|c| !taken.contains(c))
        .expect("some suffix is free")
}
