//! The reliability suite: what a hostile or unlucky client, a killed daemon or a faulty lab
//! plugin can do, tried against a real `mobilisd`. Each check prints one line of counts,
//! `reliability: <check>: tried N, failed F, lost L`, so that a reader sees what was tried.
//!
//! The fast rounds run with the default tests; `tests/reliability` runs every check with
//! its full round counts (`MOBILIS_SLOW_TESTS=1`) and then the capacity benchmark.
//!
//! # Last figures
//!
//! Counts of the last full runs (`tests/reliability`), and the cost figures quoted in the
//! module docs of the daemon, with where and when they were measured:
//!
//! | Check | Figure | Measured |
//! | --- | --- | --- |
//! | store kill -9 rounds | 200 rounds: tried 200, failed 0, lost 0 (852 dataset writes acknowledged, 878 cut by a kill); 115 s in a debug build | 2026-12-03, 2-core machine |
//! | memory returned after drops | anonymous RSS 13 MiB idle, 34-49 MiB holding a million rows (15 MiB stored), 19 MiB after each drop (32 MiB without `malloc_trim`) | 2026-12-03, 2-core machine |
//! | memory while a small table is replaced | anonymous RSS 21 MiB idle, settling at 35-39 MiB over ten replacements of a 50,000-value table (below the store's 64 MiB trim size; debug build) | 2026-12-04, 2-core machine |
//! | imports past the memory budget | refused with `resource_limit` (4009) under `--memory-budget 64KiB`: tried 1, failed 0 | 2026-12-03, 2-core machine |
//! | ids over HTTP, WebSocket and stdio | tried 57, failed 0, lost 0 (13 allowed and 6 disallowed ids x 3 transports) | 2026-12-03, 2-core machine, debug |
//! | bad stdio frames (slow run: a 100 MiB header line) | tried 20, failed 0, lost 0 | 2026-12-03, 2-core machine, debug |
//! | answers before the end of stdio input (slow run) | tried 40, failed 0, lost 0 | 2026-12-03, 2-core machine, debug |
//! | fuzzed stdio frames (slow run) | tried 20,000, failed 0, lost 0 | 2026-12-03, 2-core machine, debug |
//! | fuzzed JSON over HTTP and WebSocket (slow run) | tried 20,000, failed 0, lost 0 | 2026-12-03, 2-core machine, debug |
//! | token | tried 16, failed 0, lost 0 | 2026-12-03, 2-core machine, debug |
//! | transport checks, wall time | 12 s fast, 84 s slow (`MOBILIS_SLOW_TESTS=1`) | 2026-12-03, 2-core machine, debug |
//! | plugin segfault (NULL dereference), isolated | tried 50, failed 0, lost 0 | 2026-12-03, 2-core machine |
//! | plugin calls exit(3), isolated | tried 50, failed 0, lost 0 | 2026-12-03, 2-core machine |
//! | plugin hangs past its deadline (1 s), isolated | tried 10, failed 0, lost 0 | 2026-12-03, 2-core machine |
//! | hanging plugin cancelled by its client, killed after the 2 s grace, isolated | tried 5, failed 0, lost 0 | 2026-12-03, 2-core machine |
//! | plugin aborts in its constructor (isolated and trusted) | tried 2, failed 0, lost 0 | 2026-12-03, 2-core machine |
//! | truncated plugin libraries (46 cut points, both modes) | tried 92, failed 0, lost 0 | 2026-12-03, 2-core machine |
//! | `hall.reduce`, 1e6 readings, in process / isolated (debug build) | 10.2 s / 9.6 s median | 2026-12-03, 2-core machine |
//! | `fixture.identity`, 1e6 readings, in process / isolated (debug build) | 1.9 s / 3.6 s median | 2026-12-03, 2-core machine |
//! | path attacks into the workspace | tried 82, failed 0, lost 0 (imports and exports; start directory as root, and a root containing the workspace) | 2026-12-03, 2-core machine |
//! | symlink race on imports and exports | tried 1000, failed 0, lost 0 (`MOBILIS_SLOW_TESTS=1`; about half the calls land in the real directory, half are refused) | 2026-12-03, 2-core machine |
//! | export overwrite and atomic placement | tried 38, failed 0, lost 0 (32 racing exports of one name: one wins) | 2026-12-03, 2-core machine |
//! | calls of clients that went away | tried 20, failed 0, lost 0; the analysis stopped 1-58 ms after the connection closed (HTTP and WebSocket) | 2026-12-03, 2-core machine |
//! | deadlines | tried 7, failed 0, lost 0; `deadline_s` 0.5 answered 5005 after 0.51 s | 2026-12-03, 2-core machine |
//! | figure limits | `plot.render` of 1e6 rows in 1000 series refused (4009) in 0.10 s with a release daemon (0.76 s debug), round trip from `mobilis call` | 2026-12-03, 2-core machine |
//! | load http 8x100 (debug daemon, default tests) | tried 800, failed 0, lost 0 | 2026-12-03, 2-core machine |
//! | load websocket 8x100 (debug daemon, default tests) | tried 800, failed 0, lost 0 | 2026-12-03, 2-core machine |
//! | capacity http 32x250, release daemon | 8,000 requests, failed 0, lost 0; 764 answered/s; `server.info` p50 0.3 ms, p99 8.9 ms; `analysis.run` p50 269 ms; daemon CPU 1.46 cores, RSS 83 MiB | 2026-12-03, 2-core machine |
//! | capacity websocket 32x250, release daemon | 8,000 requests, failed 0, lost 0; 763 answered/s; `server.info` p50 0.3 ms, p99 6.2 ms; `analysis.run` p50 270 ms; daemon CPU 1.49 cores, RSS 83 MiB | 2026-12-03, 2-core machine |
//! | capacity http 32x250, debug daemon | 8,000 requests, failed 0, lost 0; 84 answered/s; `server.info` p50 4.0 ms, p99 55 ms; `analysis.run` p50 2.4 s; daemon CPU 0.58 cores, RSS 136 MiB | 2026-12-03, 2-core machine shared with builds |
//! | capacity websocket 32x250, debug daemon | 8,000 requests, failed 0, lost 0; 116 answered/s; `server.info` p50 2.0 ms, p99 27 ms; `analysis.run` p50 1.7 s; daemon CPU 0.62 cores, RSS 136 MiB | 2026-12-03, 2-core machine shared with builds |
//! | capacity websocket 32x250, debug daemon, `--compute-slots 64` (no real limit), for comparison | 8,000 requests, failed 0, lost 0; 111 answered/s; `server.info` p50 3.5 ms, p99 47 ms; `dataset.drop` p50 1.1 s | 2026-12-03, 2-core machine shared with builds |

mod counts;
mod load;
mod plugin_isolation;
mod store_crashes;
mod transport_frames;
mod workspace_and_bounds;
