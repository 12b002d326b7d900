//! Whole-number arithmetic that stops at its type's edge. The engine adds, subtracts,
//! multiplies and raises whole numbers in their own type and wraps around past its largest
//! value: `x * y` of two amounts of 5 and 4 billion came out as 1.55e18, and `POWER(x, 400)`
//! of 3 as a number of no meaning, with nothing said. Here each such step on whole numbers
//! is computed in the type the engine gives it and checked against the same step in 128-bit
//! integers, where it is exact; a result beyond the type stops the run with the values and
//! the way out (a floating-point column), as SQL engines that check their integers do
//! (common practice). Steps on floats or dates are left to the engine as they are.

use polars::prelude::*;

/// `expr` with every sum, difference, product and power whose operands and result are whole
/// numbers (by `schema`, the columns it reads) checked: see the module's words. A step whose
/// types cannot be told (an expression the engine will refuse anyway) is left as it is.
pub(crate) fn checked_integers(expr: Expr, schema: &Schema) -> Expr {
    expr.map_expr(|e| {
        let whole = |e: &Expr| e.to_field(schema).is_ok_and(|f| whole_number(f.dtype()));
        match e {
            Expr::BinaryExpr { left, op, right }
                if matches!(op, Operator::Plus | Operator::Minus | Operator::Multiply)
                    && whole(&left)
                    && whole(&right) =>
            {
                let node = Expr::BinaryExpr { left, op, right };
                let Ok(out) = node.to_field(schema) else {
                    return node;
                };
                // A step of constants alone may have no type fixed yet: left as it is.
                if !(out.dtype().is_integer() && out.dtype().is_known()) {
                    return node;
                }
                let Expr::BinaryExpr { left, right, .. } = node else {
                    unreachable!("just made")
                };
                let dtype = out.dtype().clone();
                let kernel_type = dtype.clone();
                Arc::unwrap_or_clone(left).map_many(
                    move |c: &mut [Column]| step(op, &c[0], &c[1], &kernel_type),
                    &[Arc::unwrap_or_clone(right)],
                    move |_, fields| Ok(Field::new(fields[0].name().clone(), dtype.clone())),
                )
            }
            Expr::Function {
                input,
                function: FunctionExpr::Pow(PowFunction::Generic),
            } if input.len() == 2 && input.iter().all(whole) => {
                let node = Expr::Function {
                    input: input.clone(),
                    function: FunctionExpr::Pow(PowFunction::Generic),
                };
                match node.to_field(schema) {
                    // The power as the engine computes it, checked beside its base and
                    // exponent (evaluated once more: a power of whole numbers is rare).
                    Ok(out) if out.dtype().is_integer() && out.dtype().is_known() => node.map_many(
                        |c: &mut [Column]| power_checked(&c[0], &c[1], &c[2]),
                        &input,
                        |_, fields| Ok(fields[0].clone()),
                    ),
                    _ => node,
                }
            }
            e => e,
        }
    })
}

/// Whether values of `dtype` are whole numbers (a literal's type too, before it is fixed).
fn whole_number(dtype: &DataType) -> bool {
    dtype.is_integer() || matches!(dtype, DataType::Unknown(UnknownKind::Int(_)))
}

/// `a op b` with both cast to `dtype` (the type the engine gives the step), stopping with the
/// operands' values where the result is beyond `dtype`.
fn step(op: Operator, a: &Column, b: &Column, dtype: &DataType) -> PolarsResult<Column> {
    let (a, b) = (a.cast(dtype)?, b.cast(dtype)?);
    let rows = a.len().max(b.len());
    let exact = |x: i128, y: i128| match op {
        Operator::Plus => x + y,
        Operator::Minus => x - y,
        _ => x * y,
    };
    let (x, y) = (wide(&a)?, wide(&b)?);
    let beyond_at = x
        .each(rows)
        .zip(y.each(rows))
        .position(|(x, y)| matches!((x, y), (Some(x), Some(y)) if !within(exact(x, y), dtype)));
    if let Some(i) = beyond_at {
        let sign = match op {
            Operator::Plus => "+",
            Operator::Minus => "-",
            _ => "*",
        };
        polars_bail!(ComputeError: "{} {sign} {} {}", at(&a, i), at(&b, i), beyond(dtype));
    }
    match op {
        Operator::Plus => &a + &b,
        Operator::Minus => &a - &b,
        _ => &a * &b,
    }
}

/// `result`, the engine's power of `base` to `exponent` in whole numbers, stopping with the
/// values where the power is beyond the result's type. A negative exponent is the engine's
/// affair.
fn power_checked(result: &Column, base: &Column, exponent: &Column) -> PolarsResult<Column> {
    let dtype = result.dtype();
    let rows = result.len();
    let (b, e) = (
        wide(&base.cast(dtype)?)?,
        wide(&exponent.cast(&DataType::Int64)?)?,
    );
    let beyond_at = b
        .each(rows)
        .zip(e.each(rows))
        .position(|(b, e)| match (b, e) {
            // |b| >= 2 to a power above 200 is beyond every type here.
            (Some(b), Some(e)) if e >= 0 => b
                .checked_pow(e.min(200) as u32)
                .is_none_or(|p| !within(p, dtype)),
            _ => false,
        });
    if let Some(i) = beyond_at {
        polars_bail!(ComputeError: "POWER({}, {}) {}", at(base, i), at(exponent, i),
            beyond(dtype));
    }
    Ok(result.clone())
}

/// The values of a column of whole numbers, to be read as 128-bit integers, in which a sum,
/// difference or product of two 64-bit ones is exact.
enum Wide {
    Signed(Int64Chunked),
    Unsigned(UInt64Chunked),
}

/// The values of `c` (whole numbers) as [`Wide`].
fn wide(c: &Column) -> PolarsResult<Wide> {
    Ok(match c.dtype() {
        DataType::UInt64 => Wide::Unsigned(c.u64()?.clone()),
        _ => Wide::Signed(c.cast(&DataType::Int64)?.i64()?.clone()),
    })
}

impl Wide {
    /// Each of `rows` values in turn (a constant's for every row).
    fn each(&self, rows: usize) -> Box<dyn Iterator<Item = Option<i128>> + '_> {
        match self {
            Wide::Signed(v) if v.len() == 1 => {
                Box::new(std::iter::repeat_n(v.get(0).map(i128::from), rows))
            }
            Wide::Signed(v) => Box::new(v.iter().map(|v| v.map(i128::from))),
            Wide::Unsigned(v) if v.len() == 1 => {
                Box::new(std::iter::repeat_n(v.get(0).map(i128::from), rows))
            }
            Wide::Unsigned(v) => Box::new(v.iter().map(|v| v.map(i128::from))),
        }
    }
}

/// Whether `v` is a value of the whole-number type `dtype`.
fn within(v: i128, dtype: &DataType) -> bool {
    let (lo, hi) = range(dtype);
    (lo..=hi).contains(&v)
}

/// The smallest and the largest value of a whole-number type.
fn range(dtype: &DataType) -> (i128, i128) {
    match dtype {
        DataType::Int8 => (i8::MIN.into(), i8::MAX.into()),
        DataType::Int16 => (i16::MIN.into(), i16::MAX.into()),
        DataType::Int32 => (i32::MIN.into(), i32::MAX.into()),
        DataType::UInt8 => (0, u8::MAX.into()),
        DataType::UInt16 => (0, u16::MAX.into()),
        DataType::UInt32 => (0, u32::MAX.into()),
        DataType::UInt64 => (0, u64::MAX.into()),
        _ => (i64::MIN.into(), i64::MAX.into()),
    }
}

/// The words of an error: beyond which whole numbers, and the way out.
fn beyond(dtype: &DataType) -> String {
    let (lo, hi) = range(dtype);
    let kind = match dtype {
        DataType::UInt8 | DataType::UInt16 | DataType::UInt32 | DataType::UInt64 => {
            "non-negative whole numbers"
        }
        _ => "whole numbers",
    };
    format!(
        "is beyond the {kind} this step is computed in ({lo} to {hi}); compute it with \
         floating-point numbers, such as `CAST(x AS DOUBLE)` in place of a column `x`"
    )
}

/// The value of `c` at row `i` as an error shows it (a constant's for every row).
fn at(c: &Column, i: usize) -> String {
    let i = if c.len() == 1 { 0 } else { i };
    match c.get(i) {
        Ok(AnyValue::Null) | Err(_) => "a missing value".into(),
        Ok(v) => v.to_string(),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// `expr` (SQL) on `df` with the steps checked.
    fn derived(df: &DataFrame, sql: &str) -> PolarsResult<DataFrame> {
        let expr = polars::sql::sql_expr(sql)?;
        let schema = df.schema().clone();
        df.clone()
            .lazy()
            .select([checked_integers(expr, &schema).alias("v")])
            .collect()
    }

    /// Worked by hand: the 64-bit integers end at 2^63 - 1 = 9,223,372,036,854,775,807 (the
    /// two's-complement range, from memory; Rust's `i64::MAX` says the same below).
    /// 5e9 * 4e9 = 2e19 is beyond it, 3e9 * 3e9 = 9e18 is not; i64::MAX + 1 is, i64::MAX - 1
    /// + 1 is not; 2^62 * 2 is, 2^62 * 2 - 1 computed as 2^62 + (2^62 - 1) is not.
    #[test]
    fn whole_numbers_beyond_their_type_stop_and_within_it_are_the_engines() {
        assert_eq!(range(&DataType::Int64).1, 9_223_372_036_854_775_807);
        let df = df!(
            "x" => [5_000_000_000i64, 3_000_000_000, i64::MAX, i64::MAX - 1, 1 << 62],
            "y" => [4_000_000_000i64, 3_000_000_000, 1, 1, 2],
        )
        .unwrap();
        let err = derived(&df.slice(0, 1), "x * y").unwrap_err().to_string();
        assert!(
            err.contains("5000000000 * 4000000000 is beyond the whole numbers"),
            "{err}"
        );
        let v = derived(&df.slice(1, 1), "x * y").unwrap();
        assert_eq!(
            v.column("v").unwrap().i64().unwrap().get(0),
            Some(9_000_000_000_000_000_000)
        );
        assert!(derived(&df.slice(2, 1), "x + y").is_err());
        let v = derived(&df.slice(3, 1), "x + y").unwrap();
        assert_eq!(v.column("v").unwrap().i64().unwrap().get(0), Some(i64::MAX));
        assert!(derived(&df.slice(4, 1), "x * y").is_err());
        let v = derived(&df.slice(4, 1), "x + (x - 1)").unwrap();
        assert_eq!(v.column("v").unwrap().i64().unwrap().get(0), Some(i64::MAX));
        assert!(derived(&df.slice(4, 1), "0 - x - x - x").is_err());
        // A constant: 2e18 * 5 is beyond, 2e18 * 4 is not.
        let big = df!("x" => [2_000_000_000_000_000_000i64]).unwrap();
        assert!(derived(&big, "x * 5").is_err());
        let v = derived(&big, "x * 4").unwrap();
        assert_eq!(
            v.column("v").unwrap().i64().unwrap().get(0),
            Some(8_000_000_000_000_000_000)
        );
        // Powers: 3^39 < 2^63 <= 3^40 (3^40 = 12,157,665,459,056,928,801, worked by hand).
        let three = df!("x" => [3i64]).unwrap();
        let v = derived(&three, "POWER(x, 39)").unwrap();
        assert_eq!(
            v.column("v").unwrap().i64().unwrap().get(0),
            Some(3i64.pow(39))
        );
        let err = derived(&three, "POWER(x, 40)").unwrap_err().to_string();
        assert!(err.contains("POWER(3, 40) is beyond"), "{err}");
        // Floats and missing values are the engine's as before.
        let f = df!("x" => [Some(1e300), None], "y" => [Some(1e300), Some(2.0)]).unwrap();
        let v = derived(&f, "x * y").unwrap();
        let v = v.column("v").unwrap().f64().unwrap();
        assert_eq!((v.get(0), v.get(1)), (Some(f64::INFINITY), None));
        let m = df!("x" => [Some(i64::MAX), None], "y" => [None, Some(2i64)]).unwrap();
        let v = derived(&m, "x * y").unwrap();
        assert_eq!(v.column("v").unwrap().null_count(), 2);
    }

    /// Narrower whole numbers stop at their own edge, which the engine wraps at: a 32-bit
    /// column times 2 is computed in 32 bits (2^30 * 2 = 2^31 is beyond, 2^30 * 2 - 1 not).
    #[test]
    fn narrower_whole_numbers_stop_at_their_own_edge() {
        let df = df!("x" => [1i32 << 30]).unwrap();
        let err = derived(&df, "x * 2").unwrap_err().to_string();
        assert!(err.contains("(-2147483648 to 2147483647)"), "{err}");
        let v = derived(&df, "x + (x - 1)").unwrap();
        assert_eq!(v.column("v").unwrap().i32().unwrap().get(0), Some(i32::MAX));
    }
}
