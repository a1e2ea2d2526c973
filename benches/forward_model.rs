//! Forward-model speed: a 200-cell slab with constant D, 2 000 fixed TR-BDF2 steps and every
//! observable, against a bare tridiagonal (Thomas) solve of the same size done 2 000 times.
//! Criterion prints both as elements (cell-steps) per second; their ratio is the overhead of
//! the full model step over one bare solve.

use criterion::{criterion_group, criterion_main, BenchmarkId, Criterion, Throughput};
use fickfit::model::{End, EndCondition, Geometry, Initial, Model};
use fickfit::solver::tridiag::solve_tridiagonal;
use fickfit::solver::{GridOptions, Observable, Request, Solver, SolverOptions, StepPlan};
use std::hint::black_box;

const CELLS: usize = 200;
const STEPS: usize = 2000;

fn model() -> Model {
    Model::new(
        Geometry::slab(1e-4, 1e-12),
        EndCondition::value(1.0),
        EndCondition::transfer(1e-7, 1.0, 1.0),
        Initial::Uniform(0.0),
    )
}

fn request() -> Request {
    Request {
        times: (1..=20).map(|k| k as f64 * 500.0).collect(),
        observables: vec![
            Observable::ValueAt(2e-5),
            Observable::ValueAt(5e-5),
            Observable::Amount,
            Observable::AmountChange,
            Observable::Mean,
            Observable::FractionalUptake,
            Observable::FluxIn(End::Left),
            Observable::CumulativeIn(End::Left),
            Observable::CumulativeOut(End::Right),
        ],
    }
}

fn bench(c: &mut Criterion) {
    let mut g = c.benchmark_group("forward_model");
    g.throughput(Throughput::Elements((CELLS * STEPS) as u64));
    let opts = SolverOptions {
        grid: GridOptions::uniform(CELLS),
        ..Default::default()
    };
    let m = model();
    let req = request();
    let mut solver = Solver::new(opts).expect("options");
    g.bench_function(BenchmarkId::new("tr_bdf2_fixed_steps", CELLS), |b| {
        b.iter(|| {
            let sol = solver
                .solve_with(black_box(&m), &req, StepPlan::Fixed(STEPS))
                .expect("solve");
            black_box(sol.get(2, 19));
        })
    });
    let lower = vec![-1.0; CELLS];
    let diag = vec![2.5; CELLS];
    let upper = vec![-1.0; CELLS];
    let mut x = vec![1.0; CELLS];
    let mut scratch = vec![0.0; CELLS];
    g.bench_function(BenchmarkId::new("bare_thomas_solves", CELLS), |b| {
        b.iter(|| {
            for _ in 0..STEPS {
                solve_tridiagonal(&lower, &diag, &upper, black_box(&mut x), &mut scratch);
            }
        })
    });
    let mut adaptive = Solver::new(SolverOptions::default()).expect("options");
    g.throughput(Throughput::Elements(1));
    g.bench_function("adaptive_default_grid_uptake_curve", |b| {
        b.iter(|| {
            let sol = adaptive.solve(black_box(&m), &req).expect("solve");
            black_box(sol.get(2, 19));
        })
    });
    g.finish();
}

criterion_group!(benches, bench);
criterion_main!(benches);
