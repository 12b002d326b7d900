//! Worked by hand: the number forms and markers of `load::markers`.

use super::*;

/// Column `name` of `df` as floats.
fn floats(df: &DataFrame, name: &str) -> Vec<Option<f64>> {
    df.column(name).unwrap().f64().unwrap().iter().collect()
}

/// Column `name` of `df` as whole numbers.
fn wholes(df: &DataFrame, name: &str) -> Vec<Option<i64>> {
    df.column(name).unwrap().i64().unwrap().iter().collect()
}

/// Each of `names` is still text in `df`.
fn still_text(df: &DataFrame, names: &[&str]) {
    for name in names {
        assert_eq!(
            df.column(name).unwrap().dtype(),
            &DataType::String,
            "{name}"
        );
    }
}

/// Worked by hand: `x` holds numbers and three markers; `n` whole numbers and `.`; `t`
/// text; `d` numbers and a dash (zero in accounts, not a marker), noted as text kept by
/// its second row; `m` markers only.
#[test]
fn numbers_with_markers_are_numbers_with_those_cells_missing() {
    let df = df!(
        "id" => ["A", "A", "B", "B"],
        "x" => [Some("1.5"), Some("NA"), Some(" #N/A "), Some("nan")],
        "n" => [Some("3"), Some("."), None, Some("-4")],
        "t" => ["Mills", "NA", "Docks", "Mills"],
        "d" => ["1.5", "-", "2", "3"],
        "m" => ["NA", "NA", ".", "NA"],
    )
    .unwrap();
    let (df, notes) = numbers_with_markers(df, &["id"], false).unwrap();
    assert_eq!(floats(&df, "x"), [Some(1.5), None, None, None]);
    assert_eq!(wholes(&df, "n"), [Some(3), None, None, Some(-4)]);
    still_text(&df, &["id", "t", "d", "m"]);
    assert_eq!(
        notes,
        [
            "column `x`: 3 cells marking a missing number (`NA` 1, `#N/A` 1, `nan` 1) read \
             as missing, the column as numbers",
            "column `n`: 1 cell marking a missing number (`.` 1) read as missing, the \
             column as numbers",
            "column `d` stays text: most of its first values are numbers, but data row 2 \
             holds `-`, which is not one",
        ]
    );
    // A number beyond the floats' range beside a marker: an infinity, as the reader
    // reads it alone (the column stayed text).
    let df = df!("x" => ["1e400", "nan", "-2e999", "2"]).unwrap();
    let (df, _) = numbers_with_markers(df, &[], false).unwrap();
    let inf = f64::INFINITY;
    assert_eq!(floats(&df, "x"), [Some(inf), None, Some(-inf), Some(2.0)]);
    // A decimal comma, as the reader takes it.
    let df = df!("x" => ["1,5", "NA"]).unwrap();
    let (df, _) = numbers_with_markers(df, &[], true).unwrap();
    assert_eq!(floats(&df, "x"), [Some(1.5), None]);
}

/// Worked by hand: thousands separators and parentheses, common practice in spreadsheets
/// and accounts. `s` mixes plain and grouped numbers (a decimal among them: floats); `c`
/// whole numbers with one in parentheses and a marker (integers); `g` grouped wrongly
/// (`12,34`, `1,2345`) and `p` a signed number in parentheses stay text; `u` with a
/// currency sign and `q` with a percent sign stay text, each noted with the cell that
/// keeps it so (three numbers in four). Under a decimal comma, `1.234,5`
/// is grouped and `1,234` is the reader's one point two three four.
#[test]
fn numbers_with_separators_or_parentheses_are_numbers() {
    let df = df!(
        "s" => ["950", "1,234.5", "-2,000", "+1,000,000"],
        "c" => ["(12)", "13", "NA", "(1,200)"],
        "g" => ["12,34", "5", "1,2345", "6"],
        "p" => ["(-5)", "1", "2", "3"],
        "u" => ["$1,200", "5", "6", "7"],
        "q" => ["12%", "5", "6", "7"],
    )
    .unwrap();
    let (df, notes) = numbers_with_markers(df, &[], false).unwrap();
    assert_eq!(
        floats(&df, "s"),
        [Some(950.0), Some(1234.5), Some(-2000.0), Some(1e6)]
    );
    assert_eq!(wholes(&df, "c"), [Some(-12), Some(13), None, Some(-1200)]);
    still_text(&df, &["g", "p", "u", "q"]);
    assert_eq!(
        notes,
        [
            "column `s`: 3 cells with thousands separators (the first `1,234.5`), the column \
             as numbers",
            "column `c`: 1 cell marking a missing number (`NA` 1) read as missing; 2 cells \
             in parentheses taken as negative (the first `(12)`), the column as numbers",
            "column `g` stays text: most of its first values are numbers, but data row 1 \
             holds `12,34`, which is not one",
            "column `p` stays text: most of its first values are numbers, but data row 1 \
             holds `(-5)`, which is not one",
            "column `u` stays text: most of its first values are numbers, but data row 1 \
             holds `$1,200`, which is not one",
            "column `q` stays text: most of its first values are numbers, but data row 1 \
             holds `12%`, which is not one",
        ]
    );
    let df = df!("x" => ["1.234,5", "2"], "y" => ["1,234", "NA"]).unwrap();
    let (df, _) = numbers_with_markers(df, &[], true).unwrap();
    assert_eq!(floats(&df, "x"), [Some(1234.5), Some(2.0)]);
    assert_eq!(floats(&df, "y"), [Some(1.234), None]);
}

/// Worked by hand: digits grouped by spaces (a plain one, a no-break one, a narrow
/// no-break one, as ISO 80000-1 and French or Nordic exports write them) or by an
/// apostrophe (Swiss exports), with a decimal point or, under a decimal comma, a comma.
/// Two kinds in one number (`1,234 567`), a group of other than three digits (`12 34`),
/// a first group of four (`1234 567`) or two numbers side by side (`2001 2002`) keep a
/// column text.
#[test]
fn digits_grouped_by_spaces_or_apostrophes_are_numbers() {
    let df = df!(
        "a" => ["1 234.5", "2\u{a0}000", "3", "-1\u{202f}234\u{202f}567"],
        "b" => ["1'234", "12'345'678", "NA", "(1'000)"],
        "m" => ["1,234 567", "5", "6", "7"],
        "n" => ["12 34", "5", "6", "7"],
        "f" => ["1234 567", "5", "6", "7"],
        "y" => ["2001 2002", "5", "6", "7"],
    )
    .unwrap();
    let (df, notes) = numbers_with_markers(df, &[], false).unwrap();
    assert_eq!(
        floats(&df, "a"),
        [Some(1234.5), Some(2000.0), Some(3.0), Some(-1234567.0)]
    );
    assert_eq!(
        wholes(&df, "b"),
        [Some(1234), Some(12345678), None, Some(-1000)]
    );
    still_text(&df, &["m", "n", "f", "y"]);
    assert_eq!(
        notes[0],
        "column `a`: 3 cells with thousands separators (the first `1 234.5`), the column \
         as numbers"
    );
    let df = df!("x" => ["1 234,5", "2\u{2009}000,25", "7"]).unwrap();
    let (df, _) = numbers_with_markers(df, &[], true).unwrap();
    assert_eq!(floats(&df, "x"), [Some(1234.5), Some(2000.25), Some(7.0)]);
}

/// Worked by hand: a column of amounts each written with a currency sign (`$`, `€`
/// before or after, a minus before it) or a percent sign stays text, since the sign
/// decides the unit, and the note names its first such cell; one whose first values are
/// mostly words (`Docks`, `$5`) is not noted.
#[test]
fn amounts_with_currency_or_percent_signs_stay_text_and_are_noted() {
    let df = df!(
        "usd" => ["$1,200", "$5", "-$7.5", "NA"],
        "eur" => ["12 €", "3€", "€4", "5"],
        "pct" => ["12%", "5.5%", "-1%", "0%"],
        "words" => ["Docks", "Mills", "Quay", "$5"],
    )
    .unwrap();
    let (df, notes) = numbers_with_markers(df, &[], false).unwrap();
    still_text(&df, &["usd", "eur", "pct", "words"]);
    let sign = |name: &str, row: usize, value: &str| {
        format!(
            "column `{name}` stays text: its values are numbers written with a currency or \
             percent sign (data row {row} holds `{value}`); take the sign out in the file \
             (and say in a label what the unit is) to use them as numbers"
        )
    };
    assert_eq!(
        notes,
        [
            sign("usd", 1, "$1,200"),
            sign("eur", 1, "12 €"),
            sign("pct", 1, "12%"),
        ]
    );
}

/// Worked by hand: decimals written with a comma in a file read with a decimal point stay
/// text, noted with the first such cell and the option that reads them; `1,234` is a
/// grouped number either way, so a column of those is numbers, and under a decimal comma
/// nothing is noted.
#[test]
fn decimals_with_a_comma_read_with_a_point_are_noted() {
    let note = |row: usize, value: &str| {
        format!(
            "column `x` stays text: its values are numbers with a decimal comma (data row \
             {row} holds `{value}`); give `--decimal-comma` (or `[input] decimal_comma = \
             true`) to read them as numbers, in a file whose fields another character than a \
             comma separates (usually `;`)"
        )
    };
    let df = df!("x" => ["2", "1,5", "2,25", "NA"], "g" => ["1,234", "5", "6", "7"]).unwrap();
    let (df, notes) = numbers_with_markers(df, &[], false).unwrap();
    still_text(&df, &["x"]);
    assert_eq!(wholes(&df, "g"), [Some(1234), Some(5), Some(6), Some(7)]);
    assert_eq!(notes[0], note(2, "1,5"));
    let df = df!("x" => ["1,5", "2,25"]).unwrap();
    let (df, notes) = numbers_with_markers(df, &[], true).unwrap();
    assert_eq!(floats(&df, "x"), [Some(1.5), Some(2.25)]);
    assert!(notes.is_empty(), "{notes:?}");
}

/// Worked by hand: numbers padded with spaces, as fixed-width exports write them, or with
/// a plus sign keep a column text in the reader; every other cell is plain. `w` (whole
/// numbers, one padded) stays integers, `f` (a padded decimal) floats; `t`, whose text
/// is padded too, stays text.
#[test]
fn numbers_with_spaces_or_a_plus_sign_are_numbers() {
    let df = df!(
        "w" => ["1", " 2", "3"],
        "f" => ["+5", "2.5 ", "NA"],
        "t" => [" Mills", "Docks", "1"],
    )
    .unwrap();
    let (df, notes) = numbers_with_markers(df, &[], false).unwrap();
    assert_eq!(wholes(&df, "w"), [Some(1), Some(2), Some(3)]);
    assert_eq!(floats(&df, "f"), [Some(5.0), Some(2.5), None]);
    still_text(&df, &["t"]);
    assert_eq!(
        notes,
        [
            "column `w`: 1 cell with spaces around the number or a plus sign (the first \
             ` 2`), the column as numbers",
            "column `f`: 1 cell marking a missing number (`NA` 1) read as missing; 2 cells \
             with spaces around the number or a plus sign (the first `+5`), the column as \
             numbers",
        ]
    );
}

/// Worked by hand: `sic` and `zip` hold digits only with a leading zero somewhere (the
/// first at data rows 2 and 1); `n` digits only but no leading zero; `x` a leading zero
/// beside a decimal (not a code column); `firm` is kept as it is.
#[test]
fn codes_with_leading_zeros_are_found() {
    let sample = df!(
        "firm" => ["0A", "01", "02"],
        "sic" => [Some("7370"), Some("0100"), Some("NA")],
        "zip" => ["02139", "10001", " 00501 "],
        "n" => ["100", "0", "7"],
        "x" => ["0100", "2.5", "3"],
    )
    .unwrap();
    let found = leading_zero_codes(&sample, &["firm"]).unwrap();
    assert_eq!(
        found,
        [
            ("sic".to_string(), 2, "0100".to_string()),
            ("zip".to_string(), 1, "02139".to_string()),
        ]
    );
    assert!(leading_zero("007") && !leading_zero("0") && !leading_zero("0.5"));
}

/// Every marker, in either case and after spaces, gets past the first-byte test the entity's
/// note runs before comparing a cell with the markers.
#[test]
fn the_first_byte_test_lets_every_marker_through() {
    for m in MARKERS {
        for written in [m.to_string(), m.to_uppercase(), format!("  {m}")] {
            assert!(may_be_marker(&written), "{written}");
        }
    }
    assert!(!may_be_marker("F000123") && !may_be_marker(""));
}
