//! The panel between the stages: its rows, the steps of the sample's construction so far,
//! and the rows each step moved to the rejects ledger.

use super::*;

/// The panel as the stages pass it on.
pub(super) struct Sample<'a> {
    /// The rows kept so far, sorted by entity, period and row number — with the rows of
    /// `pending`, if any, still among them.
    pub panel: DataFrame,
    /// Rows of `panel` a step removed without copying the panel down to the others (false:
    /// removed; see [`Sample::settle`]). None once settled.
    pub pending: Option<BooleanChunked>,
    /// One line per step that removed or changed rows.
    pub steps: Vec<SampleStep>,
    /// The rows removed, in ledger form, one frame per step.
    pub ledger: Vec<DataFrame>,
    /// The entity column (steps count the entities left).
    pub entity: &'a str,
}

impl Sample<'_> {
    /// Copy the panel down to the rows kept, each column in one chunk (a step that needs
    /// the panel as it stands calls this first).
    pub fn settle(&mut self) -> Result<()> {
        let panel = std::mem::take(&mut self.panel);
        self.panel = clean::settle(panel, self.pending.take().as_ref())?;
        Ok(())
    }

    /// Record a step that left the panel as it is now.
    pub fn step(&mut self, name: &str) -> Result<()> {
        let rows = self.panel.height() as u64;
        // A step that removed nothing left the same entities; otherwise they are the runs of
        // the entity column, the panel being in key order (no hash table of the entities).
        let entities = match self.steps.last() {
            Some(last) if last.rows_after == rows => last.entities_after,
            _ => clean::sorted_entities(&self.panel, self.entity)?,
        };
        let line = SampleStep::counted(&self.steps, name, rows, entities);
        self.steps.push(line);
        Ok(())
    }

    /// Record a step that moved `removed` (ledger-shaped) out of the panel.
    pub fn removed(&mut self, name: &str, removed: DataFrame) -> Result<()> {
        // The ledger holds text as text, whatever the panel holds it as.
        self.ledger.push(crate::core::spelled_out(&removed)?);
        self.step(name)
    }

    /// Apply a step that may remove rows: `f` returns the rows kept and those removed.
    pub fn filter(
        &mut self,
        name: &str,
        f: impl FnOnce(DataFrame) -> Result<(DataFrame, Option<DataFrame>)>,
    ) -> Result<()> {
        let panel = std::mem::take(&mut self.panel);
        let (rest, removed) = f(panel)?;
        self.panel = rest;
        match removed {
            Some(removed) => self.removed(name, removed),
            None => Ok(()),
        }
    }
}
