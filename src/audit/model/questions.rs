//! The model diagnostics grouped by the decision each one informs, in our own words: each test
//! has a plain label, its textbook name and its published source (METHODS.md s.3–5), and each
//! question a one-line answer read from its tests.

use crate::report::{ModelTest, Question};

/// The diagnostics panelready computes.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(super) enum Test {
    EntityIntercepts,
    EntityVariance,
    EntityVarianceOneSided,
    PeriodVariance,
    EitherVariance,
    FixedVsRandom,
    SerialCorrelation,
    CrossEntityCorrelation,
}

/// The decisions, in report order.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Decision {
    PoolOrNot,
    PeriodEffects,
    FixedOrRandom,
    IndependentErrors,
}

const DECISIONS: [Decision; 4] = [
    Decision::PoolOrNot,
    Decision::PeriodEffects,
    Decision::FixedOrRandom,
    Decision::IndependentErrors,
];

impl Decision {
    fn key(self) -> &'static str {
        match self {
            Decision::PoolOrNot => "pool_or_not",
            Decision::PeriodEffects => "period_effects",
            Decision::FixedOrRandom => "fixed_or_random",
            Decision::IndependentErrors => "independent_errors",
        }
    }

    fn question(self) -> &'static str {
        match self {
            Decision::PoolOrNot => "Do firms differ persistently? (pool or not)",
            Decision::PeriodEffects => {
                "Do some periods move every firm together? (period effects or not)"
            }
            Decision::FixedOrRandom => {
                "Are the firm differences related to the regressors? (fixed or random effects)"
            }
            Decision::IndependentErrors => {
                "Are the errors independent over time and across firms? (which standard errors)"
            }
        }
    }
}

impl Test {
    fn decision(self) -> Decision {
        match self {
            Test::EntityIntercepts | Test::EntityVariance | Test::EntityVarianceOneSided => {
                Decision::PoolOrNot
            }
            Test::PeriodVariance | Test::EitherVariance => Decision::PeriodEffects,
            Test::FixedVsRandom => Decision::FixedOrRandom,
            Test::SerialCorrelation | Test::CrossEntityCorrelation => Decision::IndependentErrors,
        }
    }

    fn key(self) -> &'static str {
        match self {
            Test::EntityIntercepts => "entity_intercepts",
            Test::EntityVariance => "entity_variance",
            Test::EntityVarianceOneSided => "entity_variance_one_sided",
            Test::PeriodVariance => "period_variance",
            Test::EitherVariance => "entity_or_period_variance",
            Test::FixedVsRandom => "fixed_vs_random",
            Test::SerialCorrelation => "serial_correlation",
            Test::CrossEntityCorrelation => "cross_entity_correlation",
        }
    }

    fn label(self) -> &'static str {
        match self {
            Test::EntityIntercepts => "one intercept per firm improves the fit",
            Test::EntityVariance => "a persistent firm part in the pooled errors",
            Test::EntityVarianceOneSided => "the same, counting only a positive variance",
            Test::PeriodVariance => "a part shared by all firms in a period",
            Test::EitherVariance => "a persistent firm part or a shared period part",
            Test::FixedVsRandom => "random-effects slopes differ from within slopes",
            Test::SerialCorrelation => "errors carry over from one period to the next",
            Test::CrossEntityCorrelation => "errors move together across firms",
        }
    }

    fn textbook_name(self) -> &'static str {
        match self {
            Test::EntityIntercepts => "F test for entity effects",
            Test::EntityVariance => "Breusch–Pagan LM test for entity effects",
            Test::EntityVarianceOneSided => "Honda's one-sided LM test",
            Test::PeriodVariance => "Breusch–Pagan LM test for period effects",
            Test::EitherVariance => "two-way Breusch–Pagan LM test",
            Test::FixedVsRandom => "Hausman test",
            Test::SerialCorrelation => "Wooldridge test for serial correlation",
            Test::CrossEntityCorrelation => "Pesaran CD test",
        }
    }

    fn source(self) -> &'static str {
        match self {
            Test::EntityIntercepts => {
                "the nested-model F test, e.g. Baltagi, Econometric Analysis of Panel Data, \
                 ch. 2, from memory"
            }
            Test::EntityVariance | Test::PeriodVariance | Test::EitherVariance => {
                "Breusch & Pagan 1980, Review of Economic Studies 47; unbalanced form: \
                 Baltagi & Li 1990"
            }
            Test::EntityVarianceOneSided => "Honda 1985, Economics Letters 17, from memory",
            Test::FixedVsRandom => "Hausman 1978, Econometrica 46(6)",
            Test::SerialCorrelation => {
                "Wooldridge 2002, Econometric Analysis of Cross Section and Panel Data, ch. 10; \
                 Drukker 2003"
            }
            Test::CrossEntityCorrelation => {
                "Pesaran 2004, working paper; published in Empirical Economics 2021"
            }
        }
    }

    /// One computed test; `variant` qualifies the textbook name (e.g. the unbalanced form).
    pub(super) fn result(
        self,
        variant: Option<&str>,
        statistic: f64,
        df: Vec<f64>,
        p: Option<f64>,
        reading: String,
    ) -> ModelTest {
        let textbook_name = match variant {
            Some(v) => format!("{}, {v}", self.textbook_name()),
            None => self.textbook_name().to_string(),
        };
        ModelTest {
            key: self.key().into(),
            label: self.label().into(),
            textbook_name,
            source: self.source().into(),
            statistic,
            df,
            p,
            reading,
        }
    }
}

fn find(tests: &[ModelTest], t: Test) -> Option<&ModelTest> {
    tests.iter().find(|m| m.key == t.key())
}

fn significant(t: Option<&ModelTest>) -> Option<bool> {
    t.and_then(|t| t.p).map(|p| p < 0.05)
}

/// Groups computed tests under their decisions, each with its answer. A decision with no
/// computed test is kept, its answer saying so.
pub(super) fn group(tests: Vec<ModelTest>, hausman_unreliable: bool) -> Vec<Question> {
    DECISIONS
        .iter()
        .map(|d| {
            let mine: Vec<ModelTest> = tests
                .iter()
                .filter(|t| ALL.iter().any(|k| k.key() == t.key && k.decision() == *d))
                .cloned()
                .collect();
            Question {
                key: d.key().into(),
                question: d.question().into(),
                answer: answer(*d, &mine, hausman_unreliable),
                tests: mine,
            }
        })
        .collect()
}

const ALL: [Test; 8] = [
    Test::EntityIntercepts,
    Test::EntityVariance,
    Test::EntityVarianceOneSided,
    Test::PeriodVariance,
    Test::EitherVariance,
    Test::FixedVsRandom,
    Test::SerialCorrelation,
    Test::CrossEntityCorrelation,
];

fn answer(d: Decision, tests: &[ModelTest], hausman_unreliable: bool) -> String {
    if tests.is_empty() {
        return "not computable: no diagnostic for this question could be computed (see the \
                warnings below)"
            .into();
    }
    match d {
        Decision::PoolOrNot => {
            let f = significant(find(tests, Test::EntityIntercepts));
            let lm = significant(find(tests, Test::EntityVariance));
            match (f, lm) {
                (Some(true), _) | (_, Some(true)) => "yes at 5%: pooled OLS would leave the \
                    persistent firm differences in the error; use entity effects (fixed or \
                    random)"
                    .into(),
                (Some(false), Some(false)) | (Some(false), None) | (None, Some(false)) => {
                    "no evidence at 5%: pooled OLS may be adequate".into()
                }
                (None, None) => "not computable: no p-value".into(),
            }
        }
        Decision::PeriodEffects => match significant(find(tests, Test::PeriodVariance)) {
            Some(true) => "yes at 5%: add period effects".into(),
            Some(false) => "no evidence at 5% of a shared period part".into(),
            None => "not computable: no p-value".into(),
        },
        Decision::FixedOrRandom => {
            if hausman_unreliable {
                return "unclear: the Hausman statistic is unreliable here (covariance \
                        difference not positive definite); read the slope comparison"
                    .into();
            }
            match significant(find(tests, Test::FixedVsRandom)) {
                Some(true) => "yes at 5%: random effects would be inconsistent; prefer the \
                    within (fixed-effects) estimator"
                    .into(),
                Some(false) => "no evidence at 5%: random effects are consistent and more \
                    efficient if their assumption holds"
                    .into(),
                None => "not computable: no p-value".into(),
            }
        }
        Decision::IndependentErrors => {
            let serial = significant(find(tests, Test::SerialCorrelation));
            let cross = significant(find(tests, Test::CrossEntityCorrelation));
            let mut found = Vec::new();
            if serial == Some(true) {
                found.push("over time within a firm (cluster standard errors by firm)");
            }
            if cross == Some(true) {
                found.push(
                    "across firms in a period (period effects or standard errors robust to \
                     cross-sectional dependence)",
                );
            }
            if !found.is_empty() {
                format!("no: the errors are correlated {}", found.join(" and "))
            } else {
                let checked: Vec<&str> = [(serial, "over time"), (cross, "across firms")]
                    .iter()
                    .filter(|(s, _)| s.is_some())
                    .map(|(_, w)| *w)
                    .collect();
                if checked.is_empty() {
                    "not computable: no p-value".into()
                } else {
                    format!("no evidence at 5% of correlation {}", checked.join(" or "))
                }
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn t(kind: Test, p: f64) -> ModelTest {
        kind.result(None, 1.0, vec![1.0], Some(p), String::new())
    }

    #[test]
    fn every_decision_is_kept_and_tests_land_under_theirs() {
        // Worked by hand: p below 0.05 reads "yes", above it "no evidence".
        let q = group(
            vec![
                t(Test::EntityIntercepts, 0.01),
                t(Test::SerialCorrelation, 0.5),
            ],
            false,
        );
        let keys: Vec<&str> = q.iter().map(|q| q.key.as_str()).collect();
        assert_eq!(
            keys,
            [
                "pool_or_not",
                "period_effects",
                "fixed_or_random",
                "independent_errors"
            ]
        );
        assert_eq!(q[0].tests.len(), 1);
        assert!(q[0].answer.starts_with("yes"));
        assert!(q[1].answer.starts_with("not computable"));
        assert!(q[3].answer.starts_with("no evidence"));
        assert!(q[3].answer.contains("over time"));
        assert!(!q[3].answer.contains("across"));
    }
}
