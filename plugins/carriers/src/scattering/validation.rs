//! Validation against published measured and empirical data.
