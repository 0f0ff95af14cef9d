//! Compute slots: a fixed number of places where CPU- and file-heavy calls run, one per core
//! by default, so that cheap calls (`server.info`, `dataset.list`, ...) never queue behind them.
//!
//! A heavy call first waits for a slot without holding any thread (an async semaphore), then
//! runs on tokio's blocking pool while holding it. Without the limit, 32 clients each running
//! an analysis would start 32 blocking threads on a 2-core machine, and every cheap call would
//! share the cores with all of them; with it, at most one analysis per core runs at a time and
//! the rest wait their turn in the queue, which costs them nothing but time.
//!
//! Heavy calls are `analysis.run`, `pipeline.run`, `dataset.import`, `dataset.export`,
//! `dataset.rows`, `plot.render` and `report.render`. `--compute-slots N` sets the number of
//! slots; the default is the number of CPUs the process may use. The permit moves into the
//! blocking task, so work whose client left keeps its slot until it really ends. Cheap calls
//! (`server.info`, `dataset.list`, `dataset.info`, `analysis.describe`, `plot.kinds`, ...) run
//! inline on the async runtime; `dataset.drop` runs on the blocking pool outside the slots,
//! since it only removes files. Where a method runs is the `Runs` value of its registration in
//! `crate::methods` (`Inline`, `Blocking`, `InComputeSlot`).

use std::sync::Arc;
use tokio::sync::Semaphore;

/// The shared limit on heavy calls running at once.
#[derive(Clone, Debug)]
pub struct ComputeSlots {
    semaphore: Arc<Semaphore>,
    count: usize,
}

/// Why a heavy call did not produce its value.
#[derive(Debug)]
pub enum SlotFailure {
    /// The work panicked on its blocking thread (the panic is not propagated into the runtime).
    Panicked,
    /// The runtime is shutting down and no longer runs work.
    ShuttingDown,
}

impl ComputeSlots {
    /// `count` slots; 0 is taken as 1, since a daemon with no slot could run no analysis.
    pub fn new(count: usize) -> Self {
        let count = count.max(1);
        ComputeSlots {
            semaphore: Arc::new(Semaphore::new(count)),
            count,
        }
    }

    /// One slot per CPU this process may use (its affinity and cgroup quota included).
    pub fn per_core() -> Self {
        Self::new(std::thread::available_parallelism().map_or(1, |n| n.get()))
    }

    /// How many heavy calls may run at once.
    pub fn count(&self) -> usize {
        self.count
    }

    /// Heavy calls running now.
    pub fn busy(&self) -> usize {
        self.count - self.semaphore.available_permits()
    }

    /// Waits for a free slot; the slot is taken until the permit is dropped. A bounded call
    /// moves the permit into its blocking work, so the slot stays taken until the work ends.
    pub async fn acquire(&self) -> Result<tokio::sync::OwnedSemaphorePermit, SlotFailure> {
        Arc::clone(&self.semaphore)
            .acquire_owned()
            .await
            .map_err(|_| SlotFailure::ShuttingDown)
    }

    /// Waits for a free slot, then runs `work` on a blocking thread while holding it.
    ///
    /// The permit travels into the blocking closure: if the caller's future is dropped (its
    /// client went away), work that has already started keeps its slot until it really ends,
    /// so the limit holds for the threads that actually run.
    pub async fn run<T, F>(&self, work: F) -> Result<T, SlotFailure>
    where
        T: Send + 'static,
        F: FnOnce() -> T + Send + 'static,
    {
        let permit = Arc::clone(&self.semaphore)
            .acquire_owned()
            .await
            .map_err(|_| SlotFailure::ShuttingDown)?;
        tokio::task::spawn_blocking(move || {
            let _slot = permit;
            work()
        })
        .await
        .map_err(|error| {
            if error.is_panic() {
                SlotFailure::Panicked
            } else {
                SlotFailure::ShuttingDown
            }
        })
    }
}

impl Default for ComputeSlots {
    fn default() -> Self {
        Self::per_core()
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::sync::atomic::{AtomicUsize, Ordering};
    use std::time::Duration;

    #[tokio::test(flavor = "multi_thread", worker_threads = 2)]
    async fn no_more_than_the_slots_run_at_once() {
        let slots = ComputeSlots::new(2);
        let running = Arc::new(AtomicUsize::new(0));
        let most = Arc::new(AtomicUsize::new(0));
        let mut calls = Vec::new();
        for _ in 0..8 {
            let slots = slots.clone();
            let running = Arc::clone(&running);
            let most = Arc::clone(&most);
            calls.push(tokio::spawn(async move {
                slots
                    .run(move || {
                        let now = running.fetch_add(1, Ordering::SeqCst) + 1;
                        most.fetch_max(now, Ordering::SeqCst);
                        std::thread::sleep(Duration::from_millis(20));
                        running.fetch_sub(1, Ordering::SeqCst);
                    })
                    .await
            }));
        }
        for call in calls {
            call.await.unwrap().unwrap();
        }
        assert_eq!(
            most.load(Ordering::SeqCst),
            2,
            "two slots allow two calls at once, and they were used"
        );
        assert_eq!(slots.busy(), 0);
    }

    #[tokio::test(flavor = "multi_thread", worker_threads = 2)]
    async fn a_panic_frees_its_slot_and_is_reported() {
        let slots = ComputeSlots::new(1);
        let failed = slots.run(|| panic!("work failed")).await;
        assert!(matches!(failed, Err(SlotFailure::Panicked)));
        assert_eq!(slots.busy(), 0);
        assert_eq!(slots.run(|| 7).await.unwrap(), 7, "the slot is usable after the panic");
    }

    #[tokio::test(flavor = "multi_thread", worker_threads = 2)]
    async fn a_dropped_caller_keeps_the_slot_until_its_work_ends() {
        let slots = ComputeSlots::new(1);
        let (started_tx, started_rx) = tokio::sync::oneshot::channel();
        let (release_tx, release_rx) = std::sync::mpsc::channel::<()>();
        let caller = {
            let slots = slots.clone();
            tokio::spawn(async move {
                slots
                    .run(move || {
                        let _ = started_tx.send(());
                        let _ = release_rx.recv();
                    })
                    .await
            })
        };
        started_rx.await.unwrap();
        caller.abort();
        let _ = caller.await;
        assert_eq!(slots.busy(), 1, "the work still runs, so it still holds its slot");
        release_tx.send(()).unwrap();
        assert_eq!(slots.run(|| "next").await.unwrap(), "next");
    }

    #[test]
    fn zero_slots_means_one() {
        assert_eq!(ComputeSlots::new(0).count(), 1);
    }
}
