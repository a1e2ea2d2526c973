//! Unit tests of the time stepper's internals; the reference-solution verification lives in
//! tests/solver_reference.rs.

use super::*;
use crate::model::{EndCondition, Geometry, Initial};

/// TR-BDF2 error constant for γ = 2 − √2 is ≈ −0.0404 (Hosea & Shampine 1996, from memory);
/// check the closed form gives that.
#[test]
fn error_constant_matches_literature() {
    assert!((ERR_COEF + 0.04044).abs() < 5e-5, "{ERR_COEF}");
    assert!((D_COEF - (1.0 - 1.0 / std::f64::consts::SQRT_2)).abs() < 1e-15);
}

/// Sealed both ends, non-uniform start: the amount stays constant (common practice: zero flux
/// at both ends conserves mass).
#[test]
fn sealed_slab_conserves_amount() {
    let model = Model::new(
        Geometry::slab(1e-3, 1e-9),
        EndCondition::Sealed,
        EndCondition::Sealed,
        Initial::Table(vec![(0.0, 0.0), (5e-4, 2.0), (1e-3, 0.5)]),
    );
    let mut s = Solver::new(SolverOptions::default()).unwrap();
    let req = Request {
        times: vec![0.0, 10.0, 100.0, 1000.0],
        observables: vec![Observable::Amount],
    };
    let sol = s.solve(&model, &req).unwrap();
    let a = sol.series(0);
    for v in a {
        assert!((v / a[0] - 1.0).abs() < 1e-12, "{a:?}");
    }
}
