//! Progress of the long computations — profile-likelihood sides and bootstrap replicates —
//! reported to an [`Observer`] that the caller installs around a computation with
//! [`observe`].
//!
//! The engine counts finished work items with a [`Counter`] (an `AtomicUsize`, so rayon
//! workers may advance it concurrently) and the counter tells the observer, if one is
//! installed. Without an observer counting costs one atomic increment per item. The observer
//! is process-wide: install it from the program's top level (the command line does), not
//! from concurrent library calls.

use std::sync::atomic::{AtomicUsize, Ordering};
use std::sync::{Arc, RwLock};

/// What is being counted.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Stage {
    /// Profile-likelihood searches: two sides per free parameter.
    Profile,
    /// Bootstrap refits: one per replicate.
    Bootstrap,
}

impl Stage {
    /// A short description for a progress line.
    pub fn describe(self) -> &'static str {
        match self {
            Stage::Profile => "profile-likelihood sides",
            Stage::Bootstrap => "bootstrap refits",
        }
    }
}

/// Receives progress. Calls may come from several threads at once.
pub trait Observer: Send + Sync {
    /// A stage with `total` items begins.
    fn started(&self, stage: Stage, total: usize);
    /// `done` of `total` items are finished.
    fn advanced(&self, stage: Stage, done: usize, total: usize);
    /// The stage ended (all items done, or it stopped early).
    fn finished(&self, stage: Stage);
}

type Shared = Arc<dyn Observer>;

static OBSERVER: RwLock<Option<Shared>> = RwLock::new(None);

fn current() -> Option<Shared> {
    OBSERVER.read().ok().and_then(|g| g.clone())
}

/// Removes the observer when dropped, also when the computation panics.
struct Reset;

impl Drop for Reset {
    fn drop(&mut self) {
        if let Ok(mut g) = OBSERVER.write() {
            *g = None;
        }
    }
}

/// Run `f` with `observer` receiving the progress of every stage started inside it.
pub fn observe<R>(observer: Arc<dyn Observer>, f: impl FnOnce() -> R) -> R {
    if let Ok(mut g) = OBSERVER.write() {
        *g = Some(observer);
    }
    let _reset = Reset;
    f()
}

/// A thread-safe count of finished items of one stage.
pub struct Counter {
    stage: Stage,
    total: usize,
    done: AtomicUsize,
    observer: Option<Shared>,
}

impl Counter {
    /// Begin counting `total` items of `stage`.
    pub fn start(stage: Stage, total: usize) -> Counter {
        let observer = current();
        if let Some(o) = &observer {
            o.started(stage, total);
        }
        Counter {
            stage,
            total,
            done: AtomicUsize::new(0),
            observer,
        }
    }

    /// One more item is finished.
    pub fn advance(&self) {
        let done = self.done.fetch_add(1, Ordering::Relaxed) + 1;
        if let Some(o) = &self.observer {
            o.advanced(self.stage, done.min(self.total), self.total);
        }
    }

    /// Items finished so far.
    pub fn done(&self) -> usize {
        self.done.load(Ordering::Relaxed)
    }

    /// The stage ended.
    pub fn finish(&self) {
        if let Some(o) = &self.observer {
            o.finished(self.stage);
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use rayon::prelude::*;
    use std::sync::Mutex;

    #[derive(Default)]
    struct Record(Mutex<Vec<(Stage, usize, usize)>>);

    impl Observer for Record {
        fn started(&self, stage: Stage, total: usize) {
            self.0.lock().unwrap().push((stage, 0, total));
        }
        fn advanced(&self, stage: Stage, done: usize, total: usize) {
            self.0.lock().unwrap().push((stage, done, total));
        }
        fn finished(&self, _: Stage) {}
    }

    /// Counting from many rayon workers reaches the total exactly once (common practice:
    /// an atomic counter loses no increments).
    #[test]
    fn parallel_counting_reaches_the_total() {
        let record = Arc::new(Record::default());
        let counter = observe(record.clone(), || {
            let c = Counter::start(Stage::Bootstrap, 500);
            (0..500).into_par_iter().for_each(|_| c.advance());
            c
        });
        assert_eq!(counter.done(), 500);
        // Other tests of this binary may run profiles meanwhile: look at this stage only.
        let events: Vec<_> = record
            .0
            .lock()
            .unwrap()
            .iter()
            .filter(|e| e.0 == Stage::Bootstrap && e.2 == 500)
            .copied()
            .collect();
        assert_eq!(events.len(), 501);
        assert_eq!(events.iter().filter(|e| e.1 == 500).count(), 1);
        let mut done: Vec<usize> = events.iter().map(|e| e.1).collect();
        done.sort_unstable();
        assert_eq!(done, (0..=500).collect::<Vec<_>>());
    }
}
