//! Running core work off the GIL: rayon threads, progress reported to Python, Ctrl-C honoured.

use std::sync::atomic::{AtomicBool, AtomicU64, Ordering};
use std::time::Duration;

use pyo3::exceptions::{PyKeyboardInterrupt, PyRuntimeError, PyValueError};
use pyo3::prelude::*;

/// What the workers and the watching thread share.
#[derive(Default)]
pub struct Control {
    /// Units of work done (trials, sampler steps).
    pub done: AtomicU64,
    /// Units of work in all.
    pub total: AtomicU64,
    cancel: AtomicBool,
}

impl Control {
    /// Whether the run should stop (Ctrl-C, or an exception in the progress callback).
    pub fn cancelled(&self) -> bool {
        self.cancel.load(Ordering::Relaxed)
    }
}

/// Runs `work` on a worker thread (inside a rayon pool of `threads`, or the global pool) with the
/// GIL released, while this thread checks Python's signals and calls `progress(done, total)`
/// every 50 ms. `work` returns `Ok(None)` when it saw the cancel flag; a KeyboardInterrupt (or
/// any exception from `progress`) sets the flag, waits for the workers to stop and is raised.
/// An error of the work becomes a `ValueError`.
pub fn run_with_progress<T: Send>(
    py: Python<'_>,
    threads: Option<usize>,
    progress: Option<Py<PyAny>>,
    work: impl FnOnce(&Control) -> Result<Option<T>, String> + Send,
) -> PyResult<T> {
    let pool = match threads {
        Some(n) => Some(
            rayon::ThreadPoolBuilder::new()
                .num_threads(n)
                .build()
                .map_err(|e| PyRuntimeError::new_err(format!("cannot start threads: {e}")))?,
        ),
        None => None,
    };
    let control = Control::default();
    let (outcome, interrupt) = py.detach(|| {
        std::thread::scope(|scope| {
            let control = &control;
            let pool = pool.as_ref();
            let handle = scope.spawn(move || match pool {
                Some(pool) => pool.install(|| work(control)),
                None => work(control),
            });
            let mut interrupt: Option<PyErr> = None;
            let mut reported = (u64::MAX, u64::MAX);
            let mut wait = Duration::from_millis(2);
            loop {
                let finished = handle.is_finished();
                let now = (
                    control.done.load(Ordering::Relaxed),
                    control.total.load(Ordering::Relaxed),
                );
                if interrupt.is_none() {
                    let checked = Python::attach(|py| -> PyResult<()> {
                        py.check_signals()?;
                        if let Some(callback) = &progress {
                            if now != reported && now.1 > 0 {
                                callback.bind(py).call1(now)?;
                            }
                        }
                        Ok(())
                    });
                    reported = now;
                    if let Err(err) = checked {
                        control.cancel.store(true, Ordering::Relaxed);
                        interrupt = Some(err);
                    }
                }
                if finished {
                    break;
                }
                std::thread::sleep(wait);
                wait = (wait * 2).min(Duration::from_millis(50));
            }
            (handle.join(), interrupt)
        })
    });
    if let Some(err) = interrupt {
        return Err(err);
    }
    match outcome {
        Ok(Ok(Some(value))) => Ok(value),
        Ok(Ok(None)) => Err(PyKeyboardInterrupt::new_err("run cancelled")),
        Ok(Err(message)) => Err(PyValueError::new_err(message)),
        Err(_) => Err(PyRuntimeError::new_err(
            "eccaudit: internal error (a worker panicked); please report it",
        )),
    }
}
