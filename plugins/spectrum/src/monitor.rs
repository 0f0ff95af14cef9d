//! Progress reports and the cancel check of a long computation, shared by the mobility
//! spectrum and the multi-carrier fit (and their tests, which run unmonitored), below both.

use mobilis_sdk::sdk::Host;

/// Progress reports and the cancel check of a long computation.
pub trait Monitor {
    /// `fraction` in [0, 1].
    fn progress(&self, fraction: f64, message: &str);
    /// True once the caller wants the computation to stop.
    fn is_cancelled(&self) -> bool;
}

impl Monitor for Host<'_> {
    fn progress(&self, fraction: f64, message: &str) {
        Host::progress(self, fraction, message);
    }

    fn is_cancelled(&self) -> bool {
        Host::is_cancelled(self)
    }
}

/// A monitor that reports nowhere and never cancels.
#[derive(Debug, Clone, Copy, Default)]
pub struct Unmonitored;

impl Monitor for Unmonitored {
    fn progress(&self, _fraction: f64, _message: &str) {}

    fn is_cancelled(&self) -> bool {
        false
    }
}
