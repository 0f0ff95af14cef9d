//! Crash safety of the dataset store: kill -9 during imports, overwrites, drops and pipelines.
