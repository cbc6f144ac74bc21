//! What every counter is given besides its input and its settings: the [`Context`] of a
//! run — who to tell about progress, when to stop, and the flag that says stop now.
//!
//! The library never prints and never installs signal handlers. A caller that wants a
//! progress bar gives an [`Observer`], which is told every [`Progress`] event; a caller
//! that wants Ctrl-C to stop a run raises the [`Interrupt`] from its handler; a caller with
//! a time budget sets a deadline. Every long loop watches the deadline and the interrupt,
//! so that a run stops cleanly and can return what it has finished. Threads are the
//! caller's: counters run in whatever rayon pool they are called in.

use std::sync::Arc;
use std::sync::atomic::{AtomicBool, Ordering};
use std::time::Instant;

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

/// What a running computation reports as it goes.
#[derive(Clone, Debug, PartialEq)]
#[non_exhaustive]
pub enum Progress {
    /// An exact count of this cell ("4x4 periodic") begins.
    Counting {
        /// The cell, as written.
        cells: String,
    },
    /// A step of an exact count finished.
    Step {
        /// Steps done.
        done: usize,
        /// Steps in all.
        all: usize,
        /// Frontier states held after it.
        states: usize,
    },
    /// The exact count under way ended (counted or stopped).
    Counted,
    /// The transfer operator of a strip this many cells wide is being built and iterated.
    Width {
        /// Strip width in cells.
        width: usize,
    },
    /// A Monte Carlo count of this cell begins.
    Sampling {
        /// The cell, as written.
        cells: String,
        /// Variables of its model.
        variables: usize,
    },
    /// One Monte Carlo replica (or Wang–Landau walk) finished.
    Replica,
    /// One realisation of the vacancies of a diluted cell was counted.
    Realisation {
        /// Realisations counted.
        done: usize,
        /// Realisations asked for.
        all: usize,
    },
}

/// A callback told every [`Progress`] event, from whatever thread the work runs on.
#[derive(Clone)]
pub struct Observer(pub Arc<dyn Fn(&Progress) + Send + Sync>);

impl Observer {
    /// An observer that calls `f`.
    pub fn new(f: impl Fn(&Progress) + Send + Sync + 'static) -> Observer {
        Observer(Arc::new(f))
    }
}

impl std::fmt::Debug for Observer {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str("Observer")
    }
}

/// The shared context of a run: progress observer, deadline and interrupt. The default
/// observes nothing, has no deadline and an interrupt nobody raises.
///
/// ```
/// use groundcount::context::{Context, Progress};
/// use std::time::{Duration, Instant};
///
/// let ctx = Context::new()
///     .with_deadline(Instant::now() + Duration::from_secs(60))
///     .with_observer(|p: &Progress| {
///         if let Progress::Width { width } = p {
///             let _ = width; // a caller would move a progress bar here
///         }
///     });
/// assert!(!ctx.should_stop());
/// ctx.interrupt.raise();
/// assert!(ctx.should_stop());
/// ```
#[derive(Clone, Debug, Default)]
pub struct Context {
    /// Told what is being computed; `None` tells nobody.
    pub observer: Option<Observer>,
    /// Stop with [`crate::Error::Deadline`] (or keep what is finished) after this instant.
    pub deadline: Option<Instant>,
    /// Once raised, stop cleanly and return what is finished (or
    /// [`crate::Error::Interrupted`]).
    pub interrupt: Interrupt,
}

impl Context {
    /// No observer, no deadline, an interrupt nobody raises.
    pub fn new() -> Context {
        Context::default()
    }

    /// The same context with this deadline.
    pub fn with_deadline(mut self, deadline: Instant) -> Context {
        self.deadline = Some(deadline);
        self
    }

    /// The same context with this interrupt flag (shared with the caller).
    pub fn with_interrupt(mut self, interrupt: Interrupt) -> Context {
        self.interrupt = interrupt;
        self
    }

    /// The same context with an observer that calls `f`.
    pub fn with_observer(mut self, f: impl Fn(&Progress) + Send + Sync + 'static) -> Context {
        self.observer = Some(Observer::new(f));
        self
    }

    /// Tell the observer, if any.
    pub fn tell(&self, progress: Progress) {
        if let Some(o) = &self.observer {
            (o.0)(&progress);
        }
    }

    /// The same context with the earlier of its own deadline and `deadline`.
    pub fn until(&self, deadline: Instant) -> Context {
        let mut c = self.clone();
        c.deadline = Some(self.deadline.map_or(deadline, |d| d.min(deadline)));
        c
    }

    /// Whether the deadline has passed.
    pub fn past_deadline(&self) -> bool {
        self.deadline.is_some_and(|d| Instant::now() > d)
    }

    /// Whether the run should stop: interrupted or past its deadline.
    pub fn should_stop(&self) -> bool {
        self.interrupt.raised() || self.past_deadline()
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

    #[test]
    fn the_earlier_deadline_wins_and_the_observer_is_told() {
        let now = Instant::now();
        let later = now + std::time::Duration::from_secs(10);
        let c = Context::new().with_deadline(later);
        assert_eq!(c.until(now).deadline, Some(now));
        assert_eq!(Context::new().until(later).deadline, Some(later));
        let seen = Arc::new(std::sync::Mutex::new(Vec::new()));
        let s = seen.clone();
        let c = Context::new().with_observer(move |p| s.lock().unwrap().push(p.clone()));
        c.tell(Progress::Width { width: 3 });
        assert_eq!(*seen.lock().unwrap(), [Progress::Width { width: 3 }]);
    }
}
