//! Tests of the uncertainty engine: `published` checks it against the worked examples of
//! JCGM 100:2008 and JCGM 101:2008, `fitting` budgets of models
//! that fit internally, `engine` its mechanics and errors.

use super::*;

mod engine;
mod fitting;
mod published;

type Model = Result<Vec<f64>, UncertaintyError>;

fn close(a: f64, b: f64, tol: f64) -> bool {
    (a - b).abs() <= tol
}

/// Y = X1 + X2 + ... (JCGM 101:2008 §9.2).
fn additive(x: &[f64]) -> Model {
    Ok(vec![x.iter().sum()])
}
