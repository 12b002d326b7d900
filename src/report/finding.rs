//! A check's finding: its own figures, which write their entries of `report.json` and lay out
//! their sections of the text and HTML reports. The report holds them in the order the checks
//! ran and knows nothing of their types.

use std::any::Any;
use std::fmt::Debug;

use super::erased::Json;
use super::layout::Section;
use super::Report;

/// A check's figures, as the reports show them.
pub trait Finding: Any + Debug + Send + Sync {
    /// Its entries of `report.json`, in order: field name (the JSON contract) and value.
    fn entries(&self) -> Vec<(&'static str, &dyn Json)>;
    /// Its entries in the `cleaned` object of `report.json`, for a check that `build` runs
    /// on the cleaned panel too (none by default).
    fn cleaned_entries(&self) -> Vec<(&'static str, &dyn Json)> {
        Vec::new()
    }
    /// Its sections of the text and HTML reports, in order; `report` is the finished report,
    /// in which the figures of the cleaned panel (`report.cleaned`) may be found.
    fn sections(&self, report: &Report) -> Vec<Section>;
}

/// Findings in the order their checks ran.
#[derive(Debug, Default)]
pub struct Findings(Vec<Box<dyn Finding>>);

impl Findings {
    /// Add one at the end.
    pub fn push(&mut self, finding: Box<dyn Finding>) {
        self.0.push(finding);
    }

    /// The finding of type `T`, if a check made one.
    pub fn get<T: Finding>(&self) -> Option<&T> {
        self.0
            .iter()
            .find_map(|f| (f.as_ref() as &dyn Any).downcast_ref::<T>())
    }

    /// Every finding, in order.
    pub fn iter(&self) -> impl Iterator<Item = &dyn Finding> {
        self.0.iter().map(|f| f.as_ref())
    }
}

/// Pretty-printed JSON of an object with these entries, laid out exactly as `serde_json`
/// pretty-prints a struct (two spaces a level), so that a report made of findings reads like
/// one serialised in one piece.
pub(crate) fn object(entries: &[(&str, String)]) -> String {
    if entries.is_empty() {
        return "{}".into();
    }
    let mut out = String::from("{\n");
    for (i, (key, value)) in entries.iter().enumerate() {
        out.push_str("  ");
        out.push_str(&serde_json::to_string(key).unwrap_or_default());
        out.push_str(": ");
        // Pretty JSON has a raw newline only between tokens (never inside a string), so
        // indenting after each one nests the value a level deeper.
        out.push_str(&value.replace('\n', "\n  "));
        if i + 1 < entries.len() {
            out.push(',');
        }
        out.push('\n');
    }
    out.push('}');
    out
}

/// The pretty JSON of each entry.
pub(crate) fn rendered(entries: Vec<(&'static str, &dyn Json)>) -> Vec<(&'static str, String)> {
    entries.into_iter().map(|(k, v)| (k, v.to_json())).collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[derive(serde::Serialize)]
    struct Inner {
        a: Vec<u32>,
        b: Option<f64>,
        c: Vec<u32>,
        d: String,
    }

    #[derive(serde::Serialize)]
    struct Outer {
        x: u64,
        inner: Inner,
        list: Vec<Inner>,
    }

    /// Assembled from entries, the object is byte for byte what serde_json pretty-prints for
    /// the same struct (nested objects, arrays, empty arrays, null, escaped newlines).
    #[test]
    fn an_object_of_entries_prints_as_serde_json_prints_the_struct() {
        let inner = || Inner {
            a: vec![1, 2],
            b: None,
            c: Vec::new(),
            d: "two\nlines \"quoted\"".into(),
        };
        let whole = Outer {
            x: 7,
            inner: inner(),
            list: vec![inner(), inner()],
        };
        let entries = rendered(vec![
            ("x", &whole.x as &dyn Json),
            ("inner", &whole.inner),
            ("list", &whole.list),
        ]);
        assert_eq!(
            object(&entries),
            serde_json::to_string_pretty(&whole).unwrap()
        );
        assert_eq!(object(&[]), "{}");
    }
}
