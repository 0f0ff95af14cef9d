//! Faulty plugin libraries: truncated files, and plugins that crash, exit or hang in a worker.
