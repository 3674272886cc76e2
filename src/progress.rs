//! Long runs (draws, bootstrap refits): a progress bar on a terminal only, and a clean stop
//! on SIGINT, SIGTERM or SIGHUP (a closed terminal).
//!
//! While a [`LongRun`] is alive, these signals only set a flag; the run checks it between
//! chunks of work and stops with [`Error::Interrupted`], so the output writer removes its
//! temporary file and the program exits with 128 + the signal number. Dropping the
//! [`LongRun`] restores the default signal handling.

use crate::draws::Control;
use crate::error::Error;
use indicatif::{ProgressBar, ProgressStyle};
use signal_hook::consts::{SIGHUP, SIGINT, SIGTERM};
use signal_hook::SigId;
use std::io::IsTerminal;
use std::sync::atomic::{AtomicUsize, Ordering};
use std::sync::Arc;

/// A progress bar (shown only when standard error is a terminal and not `quiet`) and the
/// interruption flag of one long computation.
pub struct LongRun {
    bar: ProgressBar,
    signal: Arc<AtomicUsize>,
    handlers: Vec<SigId>,
    stop: Box<dyn Fn() -> Option<Error> + Sync>,
    advance: Box<dyn Fn(u64) + Sync>,
}

impl LongRun {
    /// Starts a run of `total` items described by `label` (e.g. "draws"); installs the signal flag.
    pub fn start(total: u64, label: &'static str, quiet: bool) -> crate::Result<LongRun> {
        let bar = if quiet || !std::io::stderr().is_terminal() {
            ProgressBar::hidden()
        } else {
            let style = ProgressStyle::with_template(
                "{prefix} [{bar:40}] {pos}/{len} ({elapsed} elapsed, about {eta} left)",
            )
            .map(|s| s.progress_chars("=> "))
            .unwrap_or_else(|_| ProgressStyle::default_bar());
            ProgressBar::new(total).with_style(style).with_prefix(label)
        };
        let signal = Arc::new(AtomicUsize::new(0));
        let mut handlers = Vec::new();
        for sig in [SIGINT, SIGTERM, SIGHUP] {
            let id = signal_hook::flag::register_usize(sig, Arc::clone(&signal), sig as usize)
                .map_err(|e| Error::Computation(format!("cannot watch for interruptions: {e}")))?;
            handlers.push(id);
        }
        let flag = Arc::clone(&signal);
        let stop = Box::new(move || match flag.load(Ordering::SeqCst) {
            0 => None,
            s => Some(interrupted(s as i32)),
        });
        let ticker = bar.clone();
        let advance = Box::new(move |k: u64| ticker.inc(k));
        Ok(LongRun {
            bar,
            signal,
            handlers,
            stop,
            advance,
        })
    }

    /// The hooks to hand to the computation.
    pub fn control(&self) -> Control<'_> {
        Control {
            stop: self.stop.as_ref(),
            advance: self.advance.as_ref(),
        }
    }

    /// The interruption received so far, if any (checked again after the last chunk).
    pub fn interrupted(&self) -> Option<Error> {
        match self.signal.load(Ordering::SeqCst) {
            0 => None,
            s => Some(interrupted(s as i32)),
        }
    }
}

impl Drop for LongRun {
    fn drop(&mut self) {
        self.bar.finish_and_clear();
        for id in self.handlers.drain(..) {
            signal_hook::low_level::unregister(id);
        }
    }
}

/// The error for signal `signal`.
fn interrupted(signal: i32) -> Error {
    Error::Interrupted {
        signal,
        name: match signal {
            SIGTERM => "SIGTERM",
            SIGHUP => "SIGHUP",
            _ => "SIGINT",
        },
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn exit_codes_follow_the_shell_convention() {
        // 128 + signal number: SIGHUP = 1, SIGINT = 2, SIGTERM = 15 (POSIX signal numbers; common practice).
        assert_eq!(interrupted(SIGINT).exit_code(), 130);
        assert_eq!(interrupted(SIGTERM).exit_code(), 143);
        assert!(interrupted(SIGTERM).to_string().contains("SIGTERM"));
        assert_eq!(interrupted(SIGHUP).exit_code(), 129);
    }
}
