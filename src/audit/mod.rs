//! The checks: one file per check family, each behind the small `Check` trait, run in the
//! order of `registry()`. Checks compute and fill the `Report`; they never print.

mod glance;

use polars::prelude::DataFrame;

use crate::report::Report;
use crate::Result;

pub use glance::Glance;

/// What every check sees: the panel after the key steps, with derived variables.
pub struct Context<'a> {
    /// The panel.
    pub df: &'a DataFrame,
    /// The entity column.
    pub entity: &'a str,
    /// The period column.
    pub period: &'a str,
}

/// One family of checks.
pub trait Check {
    /// A short name for progress and errors.
    fn name(&self) -> &'static str;
    /// Compute the check's figures into `report`.
    fn run(&self, ctx: &Context, report: &mut Report) -> Result<()>;
}

/// Every check, in report order.
pub fn registry() -> Vec<Box<dyn Check>> {
    vec![Box::new(Glance)]
}

/// Run every check.
pub fn run_all(ctx: &Context, report: &mut Report) -> Result<()> {
    for check in registry() {
        check.run(ctx, report)?;
    }
    Ok(())
}
