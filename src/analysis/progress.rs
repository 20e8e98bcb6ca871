//! A progress line on stderr while resampling runs: a spinner with the number of draws done,
//! read from [`estimate::DRAWS_DONE`](crate::estimate::DRAWS_DONE) by a watcher thread.
//! indicatif draws nothing when stderr is not a terminal, so logs and CI stay clean, and the
//! outputs never depend on it.

use indicatif::{ProgressBar, ProgressDrawTarget, ProgressStyle};
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::Arc;
use std::thread::JoinHandle;
use std::time::Duration;

/// The running progress line; stopped and cleared when dropped.
pub struct Progress {
    stop: Arc<AtomicBool>,
    watcher: Option<JoinHandle<()>>,
}

impl Progress {
    /// Starts the watcher.
    pub fn start() -> Self {
        let stop = Arc::new(AtomicBool::new(false));
        let bar = ProgressBar::with_draw_target(None, ProgressDrawTarget::stderr());
        if let Ok(style) =
            ProgressStyle::with_template("{spinner} resampling: {pos} draws ({elapsed})")
        {
            bar.set_style(style);
        }
        let start = crate::estimate::DRAWS_DONE.load(Ordering::Relaxed);
        let flag = Arc::clone(&stop);
        let watcher = std::thread::spawn(move || {
            while !flag.load(Ordering::Relaxed) {
                let done = crate::estimate::DRAWS_DONE.load(Ordering::Relaxed);
                bar.set_position(done.saturating_sub(start));
                bar.tick();
                std::thread::sleep(Duration::from_millis(120));
            }
            bar.finish_and_clear();
        });
        Progress {
            stop,
            watcher: Some(watcher),
        }
    }
}

impl Drop for Progress {
    fn drop(&mut self) {
        self.stop.store(true, Ordering::Relaxed);
        if let Some(w) = self.watcher.take() {
            let _ = w.join();
        }
    }
}
