//! The update rule and its hyper-parameters, as an operator configures them.
//!
//! The binary reads the rule from the `[model]` section of the config file;
//! it is also stored in every checkpoint. `validate` is the one place that
//! says which values are allowed. Every check is written so that NaN fails
//! (`!(x > 0.0)`, never `x <= 0.0`).
//!
//! The ranges are far wider than any useful setting (step sizes and
//! strengths are typically between 0.001 and 10) but bounded: within them
//! no input, however extreme, can make the update arithmetic overflow to
//! infinity or produce NaN, which would poison the weights for good. The
//! lower bound on the step sizes keeps `1 / alpha` finite in FTRL-Proximal's
//! `sigma_i`; the upper bounds keep products such as `l2 w_i` and
//! `alpha z_i` finite for every finite `f32` state.

use std::fmt;

/// Which per-coordinate adaptive rule turns a verdict into weight changes,
/// with its hyper-parameters.
///
/// On the wire (config and JSON) the rule is tagged by `rule`:
/// `{ rule = "adagrad", eta = 0.1, l2 = 0.0 }` or
/// `{ rule = "ftrl", alpha = 0.1, beta = 1.0, l1 = 1.0, l2 = 0.0 }`.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize, serde::Deserialize)]
#[serde(tag = "rule", rename_all = "snake_case", deny_unknown_fields)]
pub enum UpdateRule {
    /// Diagonal AdaGrad (Duchi, Hazan and Singer, JMLR 2011).
    Adagrad {
        /// Base step size `eta`; the step of coordinate `i` is
        /// `eta / (delta + sqrt(G_i))`.
        eta: f64,
        /// L2 penalty `l2`: adds `l2 * w_i` to the gradient of each
        /// coordinate active in the example.
        l2: f64,
        /// `delta` in the step's denominator. Optional, 0 by default: the
        /// update skips a coordinate whose denominator is 0, which only
        /// happens while its gradient is 0 anyway.
        #[serde(default)]
        delta: f64,
    },
    /// FTRL-Proximal with per-coordinate learning rates (McMahan et al.,
    /// KDD 2013, Algorithm 1).
    Ftrl {
        /// Learning-rate scale `alpha`.
        alpha: f64,
        /// Learning-rate offset `beta`.
        beta: f64,
        /// L1 strength `lambda_1`: coordinates with `|z_i| <= l1` have a
        /// weight of exactly 0.
        l1: f64,
        /// L2 strength `lambda_2`.
        l2: f64,
    },
}

impl UpdateRule {
    /// Checks every hyper-parameter and returns all problems found, not just
    /// the first.
    ///
    /// AdaGrad: `eta` from 1e-9 to 1e9; `l2` and `delta` from 0 to 1e9.
    /// FTRL-Proximal: `alpha` from 1e-9 to 1e9; `beta`, `l1` and `l2` from 0
    /// to 1e9.
    pub fn validate(&self) -> Result<(), Vec<RuleProblem>> {
        let mut problems = Vec::new();
        match *self {
            UpdateRule::Adagrad { eta, l2, delta } => {
                check_positive(&mut problems, "model.eta", eta);
                check_non_negative(&mut problems, "model.l2", l2);
                check_non_negative(&mut problems, "model.delta", delta);
            }
            UpdateRule::Ftrl {
                alpha,
                beta,
                l1,
                l2,
            } => {
                check_positive(&mut problems, "model.alpha", alpha);
                check_non_negative(&mut problems, "model.beta", beta);
                check_non_negative(&mut problems, "model.l1", l1);
                check_non_negative(&mut problems, "model.l2", l2);
            }
        }
        if problems.is_empty() {
            Ok(())
        } else {
            Err(problems)
        }
    }

    /// The rule's name as it appears in config files and checkpoints'
    /// descriptions: `adagrad` or `ftrl`.
    pub fn name(&self) -> &'static str {
        match self {
            UpdateRule::Adagrad { .. } => "adagrad",
            UpdateRule::Ftrl { .. } => "ftrl",
        }
    }

    /// The L2 strength of either rule.
    pub fn l2(&self) -> f64 {
        match *self {
            UpdateRule::Adagrad { l2, .. } | UpdateRule::Ftrl { l2, .. } => l2,
        }
    }
}

/// The smallest step size allowed.
const MIN_STEP: f64 = 1e-9;
/// The largest value of any hyper-parameter.
const MAX_SETTING: f64 = 1e9;

fn check_positive(problems: &mut Vec<RuleProblem>, key: &'static str, value: f64) {
    // NaN fails: a range contains no NaN.
    if !(MIN_STEP..=MAX_SETTING).contains(&value) {
        problems.push(RuleProblem {
            key,
            value,
            allowed: "must be a number from 1e-9 to 1e9",
        });
    }
}

fn check_non_negative(problems: &mut Vec<RuleProblem>, key: &'static str, value: f64) {
    if !(0.0..=MAX_SETTING).contains(&value) {
        problems.push(RuleProblem {
            key,
            value,
            allowed: "must be a number from 0 to 1e9",
        });
    }
}

/// One hyper-parameter that `UpdateRule::validate` rejected.
#[derive(Debug, Clone, PartialEq)]
pub struct RuleProblem {
    /// The config key, e.g. `model.eta`.
    pub key: &'static str,
    /// The value given.
    pub value: f64,
    /// What is allowed instead.
    pub allowed: &'static str,
}

impl fmt::Display for RuleProblem {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        let RuleProblem {
            key,
            value,
            allowed,
        } = self;
        write!(f, "{key} = {value}: {allowed}")
    }
}

/// Joins problems for one error message: `a = 1: ...; b = 2: ...`.
pub(crate) fn list_problems(problems: &[RuleProblem]) -> String {
    let parts: Vec<String> = problems.iter().map(ToString::to_string).collect();
    parts.join("; ")
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn reasonable_rules_pass() {
        let adagrad = UpdateRule::Adagrad {
            eta: 0.1,
            l2: 0.0,
            delta: 0.0,
        };
        let ftrl = UpdateRule::Ftrl {
            alpha: 0.1,
            beta: 1.0,
            l1: 0.5,
            l2: 0.0,
        };
        assert_eq!(adagrad.validate(), Ok(()));
        assert_eq!(ftrl.validate(), Ok(()));
    }

    #[test]
    fn nan_and_infinity_fail() {
        let rule = UpdateRule::Adagrad {
            eta: f64::NAN,
            l2: f64::INFINITY,
            delta: f64::NAN,
        };
        let problems = rule.validate().unwrap_err();
        let keys: Vec<&str> = problems.iter().map(|p| p.key).collect();
        assert_eq!(keys, ["model.eta", "model.l2", "model.delta"]);
    }

    #[test]
    fn every_ftrl_problem_is_reported() {
        let rule = UpdateRule::Ftrl {
            alpha: 0.0,
            beta: -1.0,
            l1: f64::NAN,
            l2: -0.5,
        };
        let problems = rule.validate().unwrap_err();
        let keys: Vec<&str> = problems.iter().map(|p| p.key).collect();
        assert_eq!(keys, ["model.alpha", "model.beta", "model.l1", "model.l2"]);
        assert_eq!(
            problems[0].to_string(),
            "model.alpha = 0: must be a number from 1e-9 to 1e9"
        );
        assert_eq!(
            list_problems(&problems[1..2]),
            "model.beta = -1: must be a number from 0 to 1e9"
        );
    }

    #[test]
    fn the_bounds_are_inclusive() {
        let edge = UpdateRule::Ftrl {
            alpha: 1e-9,
            beta: 1e9,
            l1: 0.0,
            l2: 1e9,
        };
        assert_eq!(edge.validate(), Ok(()));
        let beyond = UpdateRule::Ftrl {
            alpha: 0.99e-9,
            beta: 1.01e9,
            l1: 0.0,
            l2: 0.0,
        };
        let problems = beyond.validate().unwrap_err();
        let keys: Vec<&str> = problems.iter().map(|p| p.key).collect();
        assert_eq!(keys, ["model.alpha", "model.beta"]);
    }

    #[test]
    fn zero_eta_fails_but_zero_l2_passes() {
        let rule = UpdateRule::Adagrad {
            eta: 0.0,
            l2: 0.0,
            delta: 0.0,
        };
        let problems = rule.validate().unwrap_err();
        assert_eq!(problems.len(), 1);
        assert_eq!(problems[0].key, "model.eta");
    }

    #[test]
    fn json_form_is_tagged_and_strict() {
        let rule: UpdateRule =
            serde_json::from_str(r#"{"rule":"adagrad","eta":0.25,"l2":0.001}"#).unwrap();
        assert_eq!(
            rule,
            UpdateRule::Adagrad {
                eta: 0.25,
                l2: 0.001,
                delta: 0.0
            }
        );
        let rule: UpdateRule =
            serde_json::from_str(r#"{"rule":"ftrl","alpha":0.1,"beta":1,"l1":2,"l2":0}"#).unwrap();
        assert_eq!(rule.name(), "ftrl");
        let text = serde_json::to_string(&rule).unwrap();
        assert_eq!(serde_json::from_str::<UpdateRule>(&text).unwrap(), rule);

        let unknown = r#"{"rule":"adagrad","eta":0.25,"l2":0.0,"momentum":0.9}"#;
        assert!(serde_json::from_str::<UpdateRule>(unknown).is_err());
        let missing = r#"{"rule":"ftrl","alpha":0.1,"beta":1,"l1":2}"#;
        assert!(serde_json::from_str::<UpdateRule>(missing).is_err());
        let other = r#"{"rule":"sgd","eta":0.1}"#;
        assert!(serde_json::from_str::<UpdateRule>(other).is_err());
    }
}
