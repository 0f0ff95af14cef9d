//! The reliability suite: what a hostile or unlucky client, a killed daemon or a faulty lab
//! plugin can do, tried against a real `mobilisd`. Each check prints one line of counts,
//! `reliability: <check>: tried N, failed F, lost L`, so that a reader sees what was tried.
//!
//! The fast rounds run with the default tests; `tests/reliability` runs every check with
//! its full round counts (`MOBILIS_SLOW_TESTS=1`) and then the capacity benchmark.

mod counts;
mod load;
mod plugin_isolation;
mod store_crashes;
mod transport_frames;
mod workspace_and_bounds;
