//! The host tool's one data-parallel mechanism: rayon's work-stealing pool
//! runs every parallel loop (the window and aim grids, the requirements of
//! the fit, verification, Monte Carlo).
//!
//! A panic in a worker is not swallowed: rayon carries it to the caller,
//! and the functions here resume it there, so a command whose worker
//! panicked fails instead of reporting over fewer rows. Results come back
//! in index order whatever the number of threads.

use std::sync::atomic::{AtomicUsize, Ordering};

use rayon::prelude::*;

/// `f(k)` for `k` in `0..n` on all cores, in index order.
pub fn map_rows<T: Send>(n: usize, f: impl Fn(usize) -> T + Sync + Send) -> Vec<T> {
    (0..n).into_par_iter().map(f).collect()
}

/// [`map_rows`], calling `progress` with the fraction of rows done (0..1)
/// about every 50 ms from the calling thread, and with 1.0 at the end.
/// A worker's panic is resumed on the calling thread after the rows stop.
pub fn map_rows_with_progress<T: Send>(
    n: usize,
    f: impl Fn(usize) -> T + Sync + Send,
    progress: Option<&mut dyn FnMut(f64)>,
) -> Vec<T> {
    let Some(progress) = progress else {
        return map_rows(n, f);
    };
    let done = AtomicUsize::new(0);
    let caller = std::thread::current();
    let out = std::thread::scope(|s| {
        let work = s.spawn(|| {
            // Wake the caller when the rows stop, panic or not, so it does
            // not sleep out its interval after the work is done.
            struct Wake(std::thread::Thread);
            impl Drop for Wake {
                fn drop(&mut self) {
                    self.0.unpark();
                }
            }
            let _wake = Wake(caller);
            map_rows(n, |k| {
                let r = f(k);
                done.fetch_add(1, Ordering::Relaxed);
                r
            })
        });
        while !work.is_finished() {
            progress(done.load(Ordering::Relaxed) as f64 / n.max(1) as f64);
            std::thread::park_timeout(std::time::Duration::from_millis(50));
        }
        work.join()
    });
    match out {
        Ok(rows) => {
            progress(1.0);
            rows
        }
        Err(panic) => std::panic::resume_unwind(panic),
    }
}

/// Threads the pool runs on.
#[must_use]
pub fn threads() -> usize {
    rayon::current_num_threads()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn rows_come_back_in_order() {
        let v = map_rows(1000, |k| k * 2);
        assert!(v.iter().enumerate().all(|(k, &x)| x == 2 * k));
        let mut calls = 0;
        let mut seen = |_: f64| calls += 1;
        let w = map_rows_with_progress(300, |k| k + 1, Some(&mut seen));
        assert_eq!(w.len(), 300);
        assert!(calls >= 1);
    }

    #[test]
    fn a_worker_panic_reaches_the_caller() {
        let r = std::panic::catch_unwind(|| {
            map_rows(64, |k| {
                assert_ne!(k, 37, "injected");
                k
            })
        });
        assert!(r.is_err());
        let mut p = |_: f64| {};
        let r = std::panic::catch_unwind(std::panic::AssertUnwindSafe(|| {
            map_rows_with_progress(
                64,
                |k| {
                    assert_ne!(k, 5, "injected");
                    k
                },
                Some(&mut p),
            )
        }));
        assert!(r.is_err());
    }
}
