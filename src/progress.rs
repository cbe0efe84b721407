//! Progress of long work (searches, sweeps, certificates). The library never
//! prints: it reports to a [`Progress`] sink, and the caller decides what to
//! show (the `exmesh` binary draws one line on a terminal's stderr).

use std::fmt;
use std::sync::Arc;

/// Receives progress reports. Implementations must be cheap: the search
/// calls [`Progress::update`] about twice a second.
pub trait Progress: Send + Sync {
    /// Where the work stands now, as one line without a newline (it
    /// replaces the previous line).
    fn update(&self, line: &str);
    /// The current stage ended (a terminal line would be closed).
    fn done(&self);
    /// A diagnostic line for developers (the grouping bound's rounds).
    /// Ignored by default.
    fn debug(&self, _line: &str) {}
    /// Whether developer diagnostics are wanted (off by default; they cost
    /// extra work to build).
    fn wants_debug(&self) -> bool {
        false
    }
    /// Whether reports are wanted at all: when false, callers skip
    /// building the lines.
    fn wants(&self) -> bool {
        true
    }
}

/// A sink that drops every report.
#[derive(Debug, Clone, Copy, Default)]
pub struct Silent;

impl Progress for Silent {
    fn update(&self, _line: &str) {}
    fn done(&self) {}
    fn wants(&self) -> bool {
        false
    }
}

/// A shared handle on a [`Progress`] sink, silent by default.
#[derive(Clone)]
pub struct Sink(Arc<dyn Progress>);

impl Sink {
    /// A handle on `progress`.
    pub fn new(progress: impl Progress + 'static) -> Self {
        Sink(Arc::new(progress))
    }

    /// A handle that drops every report.
    pub fn silent() -> Self {
        Sink(Arc::new(Silent))
    }

    /// Whether reports are wanted.
    pub fn wants(&self) -> bool {
        self.0.wants()
    }

    /// Whether developer diagnostics are wanted.
    pub fn wants_debug(&self) -> bool {
        self.0.wants_debug()
    }

    /// Reports `line` when reports are wanted (the closure is not run
    /// otherwise).
    pub fn update(&self, line: impl FnOnce() -> String) {
        if self.0.wants() {
            self.0.update(&line());
        }
    }

    /// Ends the current stage.
    pub fn done(&self) {
        if self.0.wants() {
            self.0.done();
        }
    }

    /// A developer diagnostic (the closure is not run when unwanted).
    pub fn debug(&self, line: impl FnOnce() -> String) {
        if self.0.wants_debug() {
            self.0.debug(&line());
        }
    }
}

impl Default for Sink {
    fn default() -> Self {
        Sink::silent()
    }
}

impl fmt::Debug for Sink {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(if self.wants() {
            "Sink(reporting)"
        } else {
            "Sink(silent)"
        })
    }
}
