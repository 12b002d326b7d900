//! The JSON renderer: the whole `Report`, pretty-printed, for programs. The report's own
//! fields and each finding's entries, in the order of `Report`'s fields.

use std::io::Write;

use super::erased::Json as ToJson;
use super::finding::{object, rendered};
use super::{Cleaned, Render, Report};

/// Renders the report as JSON.
pub struct Json;

impl Render for Json {
    fn render(&self, report: &Report, wtr: &mut dyn Write) -> std::io::Result<()> {
        wtr.write_all(report.to_json().as_bytes())?;
        writeln!(wtr)
    }
}

impl Report {
    /// The report as pretty-printed JSON (`report.json`).
    pub fn to_json(&self) -> String {
        let r = self;
        let mut entries: Vec<(&'static str, &dyn ToJson)> = vec![
            ("tool_version", &r.tool_version),
            ("input", &r.input),
            ("panel", &r.panel),
            ("keys", &r.keys),
        ];
        for finding in r.findings.iter() {
            entries.extend(finding.entries());
        }
        entries.extend([
            ("rules", &r.rules as &dyn ToJson),
            ("derived", &r.derived),
            ("skipped", &r.skipped),
            ("sample_construction", &r.sample_construction),
            ("treatment", &r.treatment),
            ("balance", &r.balance),
        ]);
        let cleaned = r.cleaned.as_ref().map(Cleaned::to_json);
        let mut entries = rendered(entries);
        entries.push(("cleaned", cleaned.unwrap_or_else(|| "null".into())));
        entries.extend(rendered(vec![
            ("model", &r.model as &dyn ToJson),
            ("verdict", &r.verdict),
        ]));
        if let Some(repairs) = &r.repairs {
            entries.push(("repairs", repairs.to_json()));
        }
        if !r.joins.is_empty() {
            entries.push(("joins", r.joins.to_json()));
        }
        object(&entries)
    }
}

impl Cleaned {
    /// The cleaned panel's figures as pretty-printed JSON: its glance, then each finding's
    /// cleaned entries.
    fn to_json(&self) -> String {
        let mut entries: Vec<(&'static str, &dyn ToJson)> = vec![("panel", &self.panel)];
        for finding in self.findings.iter() {
            entries.extend(finding.cleaned_entries());
        }
        object(&rendered(entries))
    }
}
