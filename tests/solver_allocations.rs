//! The time loop allocates nothing: a second solve on a warmed-up solver makes the same number
//! of heap allocations whether it takes 100 or 4 000 steps (counted by a wrapping global
//! allocator; common practice for checking allocation-free loops).

use fickfit::model::{End, EndCondition, Geometry, Initial, Model};
use fickfit::solver::{GridOptions, Observable, Request, Solver, SolverOptions, StepPlan};
use std::alloc::{GlobalAlloc, Layout, System};
use std::sync::atomic::{AtomicUsize, Ordering};

struct Counting;
static ALLOCS: AtomicUsize = AtomicUsize::new(0);

unsafe impl GlobalAlloc for Counting {
    unsafe fn alloc(&self, layout: Layout) -> *mut u8 {
        ALLOCS.fetch_add(1, Ordering::Relaxed);
        unsafe { System.alloc(layout) }
    }
    unsafe fn dealloc(&self, ptr: *mut u8, layout: Layout) {
        unsafe { System.dealloc(ptr, layout) }
    }
    unsafe fn realloc(&self, ptr: *mut u8, layout: Layout, new_size: usize) -> *mut u8 {
        ALLOCS.fetch_add(1, Ordering::Relaxed);
        unsafe { System.realloc(ptr, layout, new_size) }
    }
}

#[global_allocator]
static GLOBAL: Counting = Counting;

fn count(f: impl FnOnce()) -> usize {
    let before = ALLOCS.load(Ordering::Relaxed);
    f();
    ALLOCS.load(Ordering::Relaxed) - before
}

#[test]
fn time_loop_does_not_allocate() {
    let m = Model::new(
        Geometry::slab(1e-4, 1e-12),
        EndCondition::value(1.0),
        EndCondition::Sealed,
        Initial::Uniform(0.0),
    );
    let req = Request {
        times: vec![100.0, 1000.0],
        observables: vec![
            Observable::ValueAt(3e-5),
            Observable::FractionalUptake,
            Observable::CumulativeIn(End::Left),
        ],
    };
    let mut s = Solver::new(SolverOptions {
        grid: GridOptions::uniform(200),
        ..Default::default()
    })
    .unwrap();
    // Warm up with the longest run so every buffer has its final capacity.
    s.solve_with(&m, &req, StepPlan::Fixed(4000)).unwrap();
    let few = count(|| {
        s.solve_with(&m, &req, StepPlan::Fixed(100)).unwrap();
    });
    let many = count(|| {
        s.solve_with(&m, &req, StepPlan::Fixed(4000)).unwrap();
    });
    assert_eq!(few, many, "allocations grow with the number of steps");
    // A few small set-up allocations per solve (grid key, equilibrium values) are fine.
    assert!(many <= 16, "{many} allocations per warmed-up solve");
}
