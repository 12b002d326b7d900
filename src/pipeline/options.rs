//! Between derivation and the checks: every column the rules name checked against the
//! derived panel, and what the checks look at (compared variables, levels, categorical
//! columns, the model, the thresholds) gathered into `Options`; the treatments' names
//! resolved.

use super::*;

/// Options of the checks from the rules file and the panel's columns.
pub(super) fn options(
    panel: &DataFrame,
    plan: &Plan,
    columns: &[String],
    levels: Vec<String>,
    settings: Settings,
    effects: Option<Effects>,
    input: &InputConfig,
) -> Result<Options> {
    let rules = &input.rules;
    let resolve = |c: &String| rules.resolve(c);
    let missing = |column: &String, context: &str| Error::MissingColumn {
        file: input.path.clone(),
        column: column.clone(),
        context: context.into(),
    };
    let compare: Vec<String> = match &rules.file.audit.compare {
        Some(list) => list.iter().map(resolve).collect(),
        // The derived variables that are numbers.
        None => plan
            .vars
            .iter()
            .map(|v| v.name.clone())
            .filter(|v| settings::is_numbers(panel.schema(), v))
            .collect(),
    };
    if let Some(c) = compare
        .iter()
        .find(|c| panel.schema().get(c.as_str()).is_none())
    {
        return Err(missing(c, "named in `[audit] compare`"));
    }
    if let Some(c) = compare
        .iter()
        .find(|c| !settings::is_numbers(panel.schema(), c))
    {
        return Err(Error::Setting {
            setting: "[audit] compare",
            message: format!(
                "names `{c}`, which is not a column of numbers: leavers and stayers are compared \
                 by their means"
            ),
        });
    }
    let model = match (&rules.file.model, effects) {
        (Some(m), Some(effects)) => {
            let names: Vec<String> = std::iter::once(&m.outcome)
                .chain(m.regressors.iter())
                .map(resolve)
                .collect();
            if let Some(c) = names
                .iter()
                .find(|c| panel.schema().get(c.as_str()).is_none())
            {
                return Err(missing(c, "named in `[model]`"));
            }
            model_columns(panel, &names, input)?;
            Some(ModelSpec {
                outcome: names[0].clone(),
                regressors: names[1..].to_vec(),
                lagged_outcome: m.lagged_outcome,
                effects,
            })
        }
        _ => None,
    };
    let categorical: Vec<String> = rules
        .file
        .panel
        .categorical
        .iter()
        .flatten()
        .map(resolve)
        .collect();
    if let Some(c) = categorical.iter().find(|c| !columns.contains(c)) {
        return Err(missing(c, "named in `[panel] categorical`"));
    }
    if let Some(c) = settings
        .group_columns
        .iter()
        .find(|c| panel.schema().get(c.as_str()).is_none())
    {
        return Err(missing(c, "named in `[audit] outliers` by"));
    }
    Ok(Options {
        compare,
        levels,
        exclude: vec![ROW.to_string()],
        categorical,
        settings,
        model,
        reach: plan.reach(),
    })
}

/// The model's outcome and regressors (`names`, the outcome first) must be numbers (or
/// true/false), the outcome not among the regressors, no regressor named twice: anything else
/// would be estimated on missing values or a regressor equal to another, and said so only by
/// diagnostics that cannot be computed.
fn model_columns(panel: &DataFrame, names: &[String], input: &InputConfig) -> Result<()> {
    let bad = |message: String| Error::Setting {
        setting: "[model]",
        message,
    };
    for (i, name) in names.iter().enumerate() {
        let role = if i == 0 { "the outcome" } else { "a regressor" };
        if *name == input.entity {
            return Err(bad(format!(
                "names `{name}` as {role}, but it is the entity key (its effects are the model's)"
            )));
        }
        let dtype = panel.schema().get(name.as_str()).cloned();
        if !dtype.is_some_and(|d| d.is_primitive_numeric() || d.is_bool()) {
            return Err(bad(format!(
                "names `{name}` as {role}, but it is not a column of numbers (or true / false)"
            )));
        }
        if names[..i].contains(name) {
            return Err(bad(format!(
                "names `{name}` twice among the outcome and the regressors"
            )));
        }
    }
    Ok(())
}

/// The treatments' variables and groups resolved to the panel's columns; a categorical
/// column, a key or a column that is not numbers is never treated.
pub(super) fn treatments(
    treatments: Vec<Treatment>,
    panel: &DataFrame,
    categorical: &[String],
    rules: &Rules,
    input: &InputConfig,
) -> Result<Vec<Treatment>> {
    let columns: Vec<String> = panel
        .get_column_names()
        .iter()
        .map(|c| c.to_string())
        .collect();
    let treatments = treatments
        .into_iter()
        .map(|t| t.resolve(|v| rules.resolve(v), &columns))
        .collect::<Result<Vec<_>>>()?;
    if let Some(c) = treatments
        .iter()
        .flat_map(|t| &t.variables)
        .find(|v| categorical.contains(v))
    {
        return Err(Error::Setting {
            setting: "[clean] winsorize / trim",
            message: format!(
                "`{c}` is declared categorical in `[panel] categorical`: codes are never \
                 winsorized or trimmed"
            ),
        });
    }
    for v in treatments.iter().flat_map(|t| &t.variables) {
        let message = if *v == input.entity || *v == input.period {
            format!("names `{v}`, a key of the panel: keys are never winsorized or trimmed")
        } else if *v == ROW {
            format!("names `{v}`, the row number")
        } else if !settings::is_numbers(panel.schema(), v) {
            format!(
                "names `{v}`, which is not a column of numbers: only numbers are winsorized or \
                 trimmed"
            )
        } else {
            continue;
        };
        return Err(Error::Setting {
            setting: "[clean] winsorize / trim",
            message,
        });
    }
    // A variable winsorized and then trimmed would be trimmed on the cutoffs of its own
    // winsorized values, which describe no data: one treatment a variable.
    if let [first, second] = &treatments[..] {
        if let Some(v) = second
            .variables
            .iter()
            .find(|v| first.variables.contains(v))
        {
            return Err(Error::Setting {
                setting: "[clean] winsorize / trim",
                message: format!("both name `{v}`: a variable is winsorized or trimmed, not both"),
            });
        }
    }
    Ok(treatments)
}
