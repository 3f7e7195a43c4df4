//! Stopping a run cleanly on SIGINT (Ctrl-C) or SIGTERM (a scheduler's stop).
//!
//! The first signal only raises a flag; the run loop looks at it between progress
//! slices, stops there, closes the waveform file and writes the summary marked
//! interrupted. A second signal ends the process at once, for when that is not wanted.
//! The engine and the models never see signals: only the command layer polls the flag.
//!
//! SIGXFSZ (a file-size limit reached) is caught and ignored too, so a write past the
//! limit fails with an error the run reports, instead of killing the process.

use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::{Arc, OnceLock};

use signal_hook::consts::{SIGINT, SIGTERM, SIGXFSZ};

use crate::exit::Exit;

static FLAG: OnceLock<Arc<AtomicBool>> = OnceLock::new();

/// The flag the signals raise, with the handlers installed on first use.
pub fn flag() -> &'static AtomicBool {
    FLAG.get_or_init(|| {
        let flag = Arc::new(AtomicBool::new(false));
        for signal in [SIGINT, SIGTERM] {
            // Registration fails only for forbidden signals, which these are not;
            // without a handler a signal keeps its default action, which still stops.
            let _ = signal_hook::flag::register_conditional_shutdown(
                signal,
                i32::from(Exit::Interrupted.code()),
                Arc::clone(&flag),
            );
            let _ = signal_hook::flag::register(signal, Arc::clone(&flag));
        }
        let _ = signal_hook::flag::register(SIGXFSZ, Arc::new(AtomicBool::new(false)));
        flag
    })
}

/// Whether a stop was asked for.
pub fn requested() -> bool {
    FLAG.get().is_some_and(|f| f.load(Ordering::Relaxed))
}
