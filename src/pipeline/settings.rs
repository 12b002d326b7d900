//! From the rules file to typed options: the thresholds, the model's effects, the duplicate
//! policy, the level variables searched for unit slips.

use super::*;

/// The level variables searched for unit slips: `[audit] levels`, else the mapped canonical
/// amounts the data has.
pub(super) fn level_columns(
    rules: &Rules,
    raw: &[String],
    schema: &Schema,
    input: &InputConfig,
) -> Result<Vec<String>> {
    let resolve = |c: &String| rules.resolve(c);
    let levels: Vec<String> = match &rules.file.audit.levels {
        Some(list) => list.iter().map(resolve).collect(),
        None => LEVEL_COLUMNS
            .iter()
            .map(|c| resolve(&c.to_string()))
            .filter(|c| raw.contains(c))
            .collect(),
    };
    let named = rules.file.audit.levels.is_some();
    for c in &levels {
        if !raw.contains(c) {
            return Err(Error::MissingColumn {
                file: input.path.clone(),
                column: c.clone(),
                context: "named in `[audit] levels`".into(),
            });
        }
        if named && !is_numbers(schema, c) {
            return Err(Error::Setting {
                setting: "[audit] levels",
                message: format!(
                    "names `{c}`, which is not a column of numbers: unit slips are searched in \
                     amounts"
                ),
            });
        }
    }
    // A canonical amount read as text (a CSV column with words among its numbers) is not
    // searched: the check then says how many were, never that text passed.
    Ok(levels
        .into_iter()
        .filter(|c| is_numbers(schema, c))
        .collect())
}

/// The checks' thresholds from `[thresholds]` and `[audit] outliers`, checked for range.
pub(super) fn settings(rules: &crate::rules::Rules) -> Result<Settings> {
    let mut s = Settings::default();
    let t = &rules.file.thresholds;
    let bad = |setting: &'static str, message: &str| Error::Setting {
        setting,
        message: message.to_string(),
    };
    if let Some(x) = t.nearly_absorbed {
        if !(0.0..1.0).contains(&x) {
            return Err(bad(
                "[thresholds] nearly_absorbed",
                "must be at least 0 and below 1",
            ));
        }
        s.nearly_absorbed = x;
    }
    if let Some(x) = t.missing_jump {
        // A change of a share between 0 and 1: above 1 no break could ever be found.
        if !(x > 0.0 && x <= 1.0) {
            return Err(bad(
                "[thresholds] missing_jump",
                "must be above 0 and at most 1 (a change in the share of values missing)",
            ));
        }
        s.missing_jump = x;
    }
    for (value, slot, name) in [
        (t.robust_z, &mut s.robust_z, "[thresholds] robust_z"),
        (t.log_jump, &mut s.log_jump, "[thresholds] log_jump"),
    ] {
        if let Some(x) = value {
            if !(x > 0.0 && x.is_finite()) {
                return Err(bad(name, "must be a positive number"));
            }
            *slot = x;
        }
    }
    if let Some(o) = &rules.file.audit.outliers {
        (s.lower, s.upper, s.by) = (o.lower, o.upper, o.by);
        s.group_columns = o.groups.iter().map(|c| rules.resolve(c)).collect();
    }
    Ok(s)
}

/// `[model] effects`: the key columns (`["firm", "year"]`), or the older words.
pub(super) fn model_effects(
    spec: Option<&crate::rules::EffectsSpec>,
    input: &InputConfig,
) -> Result<Effects> {
    use crate::rules::EffectsSpec;
    let (e, p) = (input.entity.as_str(), input.period.as_str());
    let bad = |message: String| Error::Setting {
        setting: "[model] effects",
        message,
    };
    match spec {
        None => Ok(Effects::Entity),
        Some(EffectsSpec::Word(w)) => match w.as_str() {
            "entity" => Ok(Effects::Entity),
            "entity+period" => Ok(Effects::EntityPeriod),
            other => Err(bad(format!(
                "\"{other}\" is not a list of key columns such as [\"{e}\"] or [\"{e}\", \"{p}\"]"
            ))),
        },
        Some(EffectsSpec::Keys(keys)) => {
            let names: Vec<&str> = keys.iter().map(String::as_str).collect();
            match names.as_slice() {
                [x] if *x == e => Ok(Effects::Entity),
                [x, y] | [y, x] if *x == e && *y == p => Ok(Effects::EntityPeriod),
                _ => Err(bad(format!(
                    "{keys:?} must be [\"{e}\"] (entity effects) or [\"{e}\", \"{p}\"] (entity and period \
                     effects), named as in [panel]"
                ))),
            }
        }
    }
}

/// `prefer-max:COL` may name a canonical column; use the raw column it maps to.
pub(super) fn resolve_policy(policy: DuplicatePolicy, input: &InputConfig) -> DuplicatePolicy {
    let map = |c: String| input.rules.file.columns.get(&c).cloned().unwrap_or(c);
    match policy {
        DuplicatePolicy::PreferMax(c) => DuplicatePolicy::PreferMax(map(c)),
        DuplicatePolicy::PreferMin(c) => DuplicatePolicy::PreferMin(map(c)),
        p => p,
    }
}

/// The settings of a run: the rules file's typed values (typed as the file was read,
/// `rules::policy`) with what still needs the command or the keys — `audit` reporting
/// conflicting keys instead of failing, `prefer-max:COL` mapped to a raw column, `[model]
/// effects` named by the key columns, the `[verdict]` keys the checks declare, the ranges of
/// the thresholds — all before any file is read, identically for `audit` and `build`. Names of
/// columns are checked as soon as the panel's columns are known.
pub(super) struct Typed {
    /// `[clean] duplicates` (`audit` turns `fail` into reporting).
    pub policy: DuplicatePolicy,
    /// `[clean] drop_singletons`.
    pub singletons: SingletonPolicy,
    /// `[clean] balance`.
    pub balance: Balance,
    /// `[repair] unit_slips`.
    pub slips: repair::SlipPolicy,
    /// `[verdict]` and `[thresholds] attrition_p`.
    pub levels: audit::verdict::Levels,
    /// `[thresholds]` and `[audit] outliers`.
    pub settings: Settings,
    /// `[model] effects`, when a model is declared.
    pub effects: Option<Effects>,
    /// `[clean] winsorize` and `trim`, in that order, names not yet resolved.
    pub treatments: Vec<Treatment>,
}

/// The settings of a run, from the rules file and the command; no file is read.
pub(super) fn typed(input: &InputConfig, mode: Mode) -> Result<Typed> {
    let file = &input.rules.file;
    let policy = match (mode, file.clean.duplicates.clone()) {
        (Mode::Audit, DuplicatePolicy::Fail) => DuplicatePolicy::Report,
        (_, p) => resolve_policy(p, input),
    };
    if file.panel.year_end_cutoff.is_some_and(|m| m > 12) {
        return Err(Error::Setting {
            setting: "[panel] year_end_cutoff",
            message: "a month, 0 to 12 (0: a fiscal year is the calendar year of its end)".into(),
        });
    }
    let treatments = [
        (Method::Winsorize, &file.clean.winsorize),
        (Method::Trim, &file.clean.trim),
    ]
    .into_iter()
    .filter_map(|(method, spec)| spec.as_ref().map(|s| Treatment::from_spec(method, s)))
    .collect();
    let effects = match &file.model {
        Some(m) => Some(model_effects(m.effects.as_ref(), input)?),
        None => None,
    };
    Ok(Typed {
        policy,
        singletons: file.clean.drop_singletons,
        balance: file.clean.balance,
        slips: file.repair.unit_slips,
        levels: audit::verdict::Levels::from_rules(file)?,
        settings: settings(&input.rules)?,
        effects,
        treatments,
    })
}

/// Whether column `name` of `schema` holds numbers.
pub(super) fn is_numbers(schema: &Schema, name: &str) -> bool {
    schema.get(name).is_some_and(|d| d.is_primitive_numeric())
}
