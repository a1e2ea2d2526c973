//! Prints the simulated water uptake of a coating film: an invented scenario (a 120 µm free
//! film of a fictional polyurethane, "test coating TC-4", hung in humid air, with a finite
//! surface-transfer coefficient), next to the ideal film with no surface resistance.
//!
//! Run: `cargo run --release --example uptake_curve`

use fickfit::model::{EndCondition, Geometry, Initial, Model};
use fickfit::solver::{Observable, Request, Solver, SolverOptions};

fn main() -> Result<(), fickfit::Error> {
    let thickness = 120e-6; // m
    let diffusivity = 2.0e-13; // m²/s
    let transfer = 2.0e-9; // m/s  (Bi = h (L/2) / D = 0.6)
    let saturation = 35.0; // kg/m³ of water at equilibrium
    let resisted = Model::new(
        Geometry::slab(thickness, diffusivity),
        EndCondition::transfer(transfer, 1.0, saturation),
        EndCondition::transfer(transfer, 1.0, saturation),
        Initial::Uniform(0.0),
    );
    let mut ideal = resisted.clone();
    ideal.left = EndCondition::value(saturation);
    ideal.right = EndCondition::value(saturation);

    let hours: Vec<f64> = [
        0.25, 0.5, 1.0, 2.0, 4.0, 6.0, 9.0, 12.0, 18.0, 24.0, 36.0, 48.0, 72.0,
    ]
    .to_vec();
    let request = Request {
        times: hours.iter().map(|h| h * 3600.0).collect(),
        observables: vec![Observable::FractionalUptake, Observable::AmountChange],
    };
    let mut solver = Solver::new(SolverOptions::default())?;
    let with = solver.solve(&resisted, &request)?.clone();
    let without = solver.solve(&ideal, &request)?.clone();

    println!(
        "Water uptake of a 120 µm coating film (invented data; D = 2.0e-13 m²/s, h = 2.0e-9 m/s)"
    );
    println!(
        "{:>8}  {:>12}  {:>14}  {:>12}",
        "t [h]", "Mt/Minf", "gain [g/m²]", "ideal film"
    );
    for (k, h) in hours.iter().enumerate() {
        println!(
            "{:>8.2}  {:>12.5}  {:>14.4}  {:>12.5}",
            h,
            with.get(0, k),
            with.get(1, k) * 1e3,
            without.get(0, k)
        );
    }
    println!(
        "steps: {} with surface resistance, {} ideal; grid: {} cells",
        with.stats.steps,
        without.stats.steps,
        solver.grid().len()
    );
    Ok(())
}
