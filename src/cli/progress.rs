//! A spinner on stderr for an import that takes more than a second: the
//! file's name and the time elapsed. Drawn only where stderr is a terminal
//! and `--quiet` is off, so pipes, logs and tests see nothing; it has no
//! colour, so `NO_COLOR` has nothing to turn off.

use std::io::IsTerminal;
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::Arc;
use std::thread::JoinHandle;
use std::time::{Duration, Instant};

/// How long work runs before the spinner shows.
const SHOW_AFTER: Duration = Duration::from_secs(1);
const TICK: Duration = Duration::from_millis(100);

/// Shows while alive; cleared when dropped.
pub struct Spinner {
    done: Arc<AtomicBool>,
    thread: Option<JoinHandle<()>>,
}

impl Spinner {
    pub fn start(message: String) -> Spinner {
        let done = Arc::new(AtomicBool::new(false));
        if super::quiet() || !std::io::stderr().is_terminal() {
            return Spinner { done, thread: None };
        }
        let flag = Arc::clone(&done);
        let thread = std::thread::spawn(move || {
            let started = Instant::now();
            while started.elapsed() < SHOW_AFTER {
                if flag.load(Ordering::Relaxed) {
                    return;
                }
                std::thread::sleep(TICK);
            }
            let bar = indicatif::ProgressBar::new_spinner().with_elapsed(started.elapsed());
            bar.set_style(
                indicatif::ProgressStyle::with_template("{spinner} {msg} ({elapsed})")
                    .expect("a valid template"),
            );
            bar.set_message(message);
            bar.enable_steady_tick(TICK);
            while !flag.load(Ordering::Relaxed) {
                std::thread::sleep(TICK);
            }
            bar.finish_and_clear();
        });
        Spinner {
            done,
            thread: Some(thread),
        }
    }
}

impl Drop for Spinner {
    fn drop(&mut self) {
        self.done.store(true, Ordering::Relaxed);
        if let Some(t) = self.thread.take() {
            let _ = t.join();
        }
    }
}
