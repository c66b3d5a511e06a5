//! Independent jobs on every core: one job per item, results in item order.

/// The number of workers: one per core the system gives this process.
pub fn workers() -> usize {
    std::thread::available_parallelism().map_or(1, |n| n.get())
}

/// `f(0)`, ..., `f(count - 1)` on `workers` threads, each taking the next
/// item when free (so a long job does not hold up short ones); the results
/// in item order. Memory is what the jobs hold at once, one per worker, plus
/// their results.
pub fn map_in_order<T: Send>(
    count: usize,
    workers: usize,
    f: impl Fn(usize) -> T + Sync,
) -> Vec<T> {
    let next = std::sync::atomic::AtomicUsize::new(0);
    let results = std::sync::Mutex::new(Vec::with_capacity(count));
    std::thread::scope(|scope| {
        for _ in 0..workers.clamp(1, count.max(1)) {
            scope.spawn(|| loop {
                let i = next.fetch_add(1, std::sync::atomic::Ordering::Relaxed);
                if i >= count {
                    break;
                }
                let result = f(i);
                if let Ok(mut all) = results.lock() {
                    all.push((i, result));
                }
            });
        }
    });
    let mut all = results.into_inner().unwrap_or_default();
    all.sort_by_key(|(i, _)| *i);
    all.into_iter().map(|(_, r)| r).collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn results_come_back_in_item_order_whatever_the_workers() {
        for workers in [1, 2, 7] {
            let squares = map_in_order(50, workers, |i| i * i);
            assert_eq!(squares, (0..50).map(|i| i * i).collect::<Vec<_>>());
        }
        assert!(map_in_order(0, 4, |i| i).is_empty());
    }
}
