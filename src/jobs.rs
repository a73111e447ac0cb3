//! Independent pieces of work on several threads, with the results in the
//! order of the input: the files of `test`, the steps of a `scan`, the
//! configurations of `sample`. What is printed never depends on which
//! thread finished first, so output is the same byte for byte with any
//! number of jobs.
//!
//! Plain scoped threads from the standard library: the work items are few
//! and coarse (a whole file, a quadrature), so a work queue of one atomic
//! counter is all the scheduling they need. Each thread has the checker's
//! large stack (see [`crate::budget::on_checker_stack`]), because the work
//! it runs may nest as deep as a file allows.

use std::sync::atomic::{AtomicUsize, Ordering};
use std::sync::mpsc;

/// The number of jobs when none is asked for: the parallelism the system
/// reports (1 when it cannot tell).
pub fn available() -> usize {
    std::thread::available_parallelism().map_or(1, |n| n.get())
}

/// `f(k, &items[k])` for every item, on up to `jobs` threads (the caller's
/// among them), and the results in the order of `items`. `done(finished,
/// total)` is called on the caller's thread after each item, in the order
/// items finish (for a progress line).
///
/// An item whose result is `Err` makes the items after it unnecessary:
/// they are skipped where they have not started, and the results end at
/// the first error in input order — what a serial loop with `?` gives.
/// With `first_alone` the first item runs alone before the others start,
/// so that what it leaves in a shared cache (the symbolic work of a
/// numeric statement) is there for all of them.
pub fn map_ordered<I, T, E, F>(
    jobs: usize,
    items: &[I],
    first_alone: bool,
    f: F,
    done: &mut dyn FnMut(usize, usize),
) -> Vec<Result<T, E>>
where
    I: Sync,
    T: Send,
    E: Send,
    F: Fn(usize, &I) -> Result<T, E> + Sync,
{
    let total = items.len();
    let jobs = jobs.clamp(1, total.max(1));
    let mut results: Vec<Option<Result<T, E>>> = (0..total).map(|_| None).collect();
    if total == 0 {
        return Vec::new();
    }
    if jobs == 1 {
        for (k, item) in items.iter().enumerate() {
            let r = f(k, item);
            let stop = r.is_err();
            results[k] = Some(r);
            done(k + 1, total);
            if stop {
                break;
            }
        }
    } else {
        let mut start = 0;
        if first_alone {
            // If the first item fails, nothing after it is needed.
            let first = f(0, &items[0]);
            let failed = first.is_err();
            results[0] = Some(first);
            done(1, total);
            start = if failed { total } else { 1 };
        }
        if start < total {
            run_parallel(jobs, items, start, &f, &mut results, done);
        }
    }
    // Up to and including the first error, in input order.
    let mut out = Vec::with_capacity(total);
    for r in results {
        match r {
            Some(Err(e)) => {
                out.push(Err(e));
                break;
            }
            Some(ok) => out.push(ok),
            // Skipped because an earlier item failed.
            None => break,
        }
    }
    out
}

/// Items `start..` on `jobs` threads: each takes the next item from a
/// shared counter and sends its result back; an error lowers the bound past
/// which items are skipped.
fn run_parallel<I, T, E, F>(
    jobs: usize,
    items: &[I],
    start: usize,
    f: &F,
    results: &mut [Option<Result<T, E>>],
    done: &mut dyn FnMut(usize, usize),
) where
    I: Sync,
    T: Send,
    E: Send,
    F: Fn(usize, &I) -> Result<T, E> + Sync,
{
    let total = items.len();
    let next = AtomicUsize::new(start);
    // Items at or after this index are not needed (an earlier one failed).
    let bound = AtomicUsize::new(total);
    let (send, receive) = mpsc::channel::<(usize, Result<T, E>)>();
    std::thread::scope(|scope| {
        let work = |send: mpsc::Sender<(usize, Result<T, E>)>| loop {
            let k = next.fetch_add(1, Ordering::SeqCst);
            if k >= bound.load(Ordering::SeqCst) {
                break;
            }
            let r = f(k, &items[k]);
            if r.is_err() {
                bound.fetch_min(k + 1, Ordering::SeqCst);
            }
            if send.send((k, r)).is_err() {
                break;
            }
        };
        let mut started = 0;
        for _ in 0..jobs {
            let send = send.clone();
            let spawned = std::thread::Builder::new()
                .name("wardsmith-job".into())
                .stack_size(crate::budget::CHECKER_STACK)
                .spawn_scoped(scope, move || work(send));
            if spawned.is_ok() {
                started += 1;
            }
        }
        // No thread could start: the caller does the work.
        if started == 0 {
            work(send.clone());
        }
        drop(send);
        let mut finished = start;
        for (k, r) in receive {
            results[k] = Some(r);
            finished += 1;
            done(finished, total);
        }
    });
}

#[cfg(test)]
mod tests {
    use super::map_ordered;

    #[test]
    fn results_come_in_input_order() {
        let items: Vec<u64> = (0..50).collect();
        for jobs in [1, 2, 4, 64] {
            let mut calls = Vec::new();
            let out = map_ordered(
                jobs,
                &items,
                jobs % 2 == 0,
                |k, x| {
                    // Uneven work, so that items finish out of order.
                    let spin = (50 - k as u64) * 1000;
                    let mut s = 0u64;
                    for i in 0..spin {
                        s = s.wrapping_add(i ^ x);
                    }
                    std::hint::black_box(s);
                    Ok::<u64, String>(x * x)
                },
                &mut |done, total| calls.push((done, total)),
            );
            let squares: Vec<u64> = out.into_iter().map(|r| r.expect("no error")).collect();
            assert_eq!(squares, items.iter().map(|x| x * x).collect::<Vec<_>>());
            assert_eq!(calls.len(), 50);
            assert_eq!(calls.last(), Some(&(50, 50)));
        }
    }

    #[test]
    fn results_end_at_the_first_error_in_input_order() {
        let items: Vec<usize> = (0..40).collect();
        for jobs in [1, 2, 3, 8] {
            let out = map_ordered(
                jobs,
                &items,
                true,
                |_, &x| {
                    if x == 17 || x == 30 {
                        Err(x)
                    } else {
                        Ok(x)
                    }
                },
                &mut |_, _| {},
            );
            assert_eq!(out.len(), 18, "jobs {jobs}");
            assert_eq!(out[17], Err(17));
            assert!(out[..17].iter().all(Result::is_ok));
        }
        for first_alone in [false, true] {
            let out = map_ordered(
                2,
                &[1, 2, 3],
                first_alone,
                |_, &x| Err::<u8, u8>(x),
                &mut |_, _| {},
            );
            assert_eq!(out, vec![Err(1)]);
        }
        let none: Vec<Result<u8, u8>> =
            map_ordered(2, &[] as &[u8], false, |_, &x| Ok(x), &mut |_, _| {});
        assert!(none.is_empty());
    }
}
