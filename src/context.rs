//! What a long computation is given besides its input and its settings: a way to be told
//! to stop.
//!
//! The library never installs signal handlers; the binary raises an [`Interrupt`] when the
//! user presses Ctrl-C, and every long loop that already watches a deadline also watches
//! the interrupt, so that a run stops cleanly and can return what it has finished.

use std::sync::Arc;
use std::sync::atomic::{AtomicBool, Ordering};

/// A flag shared between the caller and a running computation; once raised it stays
/// raised. Cloning shares the flag.
#[derive(Clone, Debug, Default)]
pub struct Interrupt(Arc<AtomicBool>);

impl Interrupt {
    /// A flag that is not raised.
    pub fn new() -> Interrupt {
        Interrupt::default()
    }

    /// Ask every computation watching this flag to stop.
    pub fn raise(&self) {
        self.0.store(true, Ordering::Relaxed);
    }

    /// Whether the flag has been raised.
    pub fn raised(&self) -> bool {
        self.0.load(Ordering::Relaxed)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn clones_share_the_flag() {
        let a = Interrupt::new();
        let b = a.clone();
        assert!(!b.raised());
        a.raise();
        assert!(b.raised());
    }
}
