//! Third-party readers run so that a panic on a corrupt file becomes an error naming the
//! file instead of a crash. While such a reader runs, [`active`] tells the command line's
//! panic hook that a panic is expected and will be reported as an error.

use std::panic::{catch_unwind, AssertUnwindSafe};
use std::path::Path;
use std::sync::atomic::{AtomicUsize, Ordering};

use super::CatalogueError;

static ACTIVE: AtomicUsize = AtomicUsize::new(0);

/// Whether a contained reader is running (in any thread: readers panic in worker threads).
pub fn active() -> bool {
    ACTIVE.load(Ordering::SeqCst) > 0
}

struct Running;

impl Running {
    fn start() -> Running {
        ACTIVE.fetch_add(1, Ordering::SeqCst);
        Running
    }
}

impl Drop for Running {
    fn drop(&mut self) {
        ACTIVE.fetch_sub(1, Ordering::SeqCst);
    }
}

/// Run `read` on `path`; a panic inside it becomes "unreadable `what` file".
pub fn read<T>(
    path: &Path,
    what: &str,
    read: impl FnOnce() -> Result<T, CatalogueError>,
) -> Result<T, CatalogueError> {
    let _running = Running::start();
    catch_unwind(AssertUnwindSafe(read)).unwrap_or_else(|payload| {
        let detail = payload
            .downcast_ref::<String>()
            .map(String::as_str)
            .or_else(|| payload.downcast_ref::<&str>().copied())
            .unwrap_or("no detail");
        Err(CatalogueError::read(
            path,
            format!("unreadable {what} file: its reader failed on the file's contents ({detail})"),
        ))
    })
}
