//! The one line every reliability check prints, and the round counts of fast and slow runs.

/// True when the full (slow) round counts are asked for: `MOBILIS_SLOW_TESTS=1`.
pub fn slow() -> bool {
    mobilis_tests::slow_tests()
}

/// `fast` rounds in the default run, `full` under `MOBILIS_SLOW_TESTS=1`.
#[allow(dead_code)]
pub fn rounds(fast: usize, full: usize) -> usize {
    if slow() {
        full
    } else {
        fast
    }
}

/// Prints `reliability: <check>: tried N, failed F, lost L` (to stdout; `--nocapture` shows it).
#[allow(dead_code)]
pub fn report(check: &str, tried: usize, failed: usize, lost: usize) {
    println!("reliability: {check}: tried {tried}, failed {failed}, lost {lost}");
}
