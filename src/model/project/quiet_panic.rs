//! Reads through a third-party decoder that may panic on malformed input (the `parquet`
//! crate asserts on some corrupt metadata, found by tests/fuzz_loaders.rs): the panic is
//! caught and becomes a [`LoadError`] naming the file and where the read was, and its
//! message never reaches the terminal.
//!
//! The process-wide panic hook is replaced once by a hook that stays silent on threads that
//! are inside [`guard`] (a thread-local depth) and hands every other panic to the hook that
//! was installed before, so panics elsewhere are reported as usual, also while another
//! thread is reading.

use std::cell::{Cell, RefCell};
use std::sync::Once;

use super::LoadError;

thread_local! {
    /// How many [`guard`]s this thread is inside.
    static DEPTH: Cell<usize> = const { Cell::new(0) };
    /// The message of the panic caught on this thread, without its source location.
    static CAUGHT: RefCell<Option<String>> = const { RefCell::new(None) };
}

static INSTALL: Once = Once::new();

fn install() {
    INSTALL.call_once(|| {
        let previous = std::panic::take_hook();
        std::panic::set_hook(Box::new(move |info| {
            if DEPTH.with(Cell::get) > 0 {
                let p = info.payload();
                let why = p
                    .downcast_ref::<&str>()
                    .map(|s| s.to_string())
                    .or_else(|| p.downcast_ref::<String>().cloned());
                CAUGHT.with(|c| *c.borrow_mut() = why);
            } else {
                previous(info);
            }
        }));
    });
}

/// Where a guarded read is, for the error: a field name, or a row.
#[derive(Debug, Default)]
pub(super) struct Progress {
    field: RefCell<Option<String>>,
    row: Cell<Option<usize>>,
}

impl Progress {
    /// The read is now in `field` (e.g. `column "vector"`, `row group 2`).
    pub(super) fn field(&self, field: impl Into<String>) {
        *self.field.borrow_mut() = Some(field.into());
    }

    /// The read is now at row `r`.
    pub(super) fn row(&self, r: usize) {
        self.row.set(Some(r));
    }

    fn describe(&self) -> String {
        match (self.field.borrow().as_deref(), self.row.get()) {
            (Some(f), Some(r)) => format!("{f}, row {r}"),
            (Some(f), None) => f.to_string(),
            (None, Some(r)) => format!("row {r}"),
            (None, None) => "metadata".to_string(),
        }
    }
}

/// Run `f`, turning a panic inside it into a load error naming `file` and the place the
/// read had reached (as `f` reported it to its [`Progress`]); the panic message is not
/// printed.
pub(super) fn guard<T>(
    file: &str,
    f: impl FnOnce(&Progress) -> Result<T, LoadError>,
) -> Result<T, LoadError> {
    install();
    let progress = Progress::default();
    DEPTH.with(|d| d.set(d.get() + 1));
    let r = std::panic::catch_unwind(std::panic::AssertUnwindSafe(|| f(&progress)));
    DEPTH.with(|d| d.set(d.get() - 1));
    r.unwrap_or_else(|_| {
        let why = CAUGHT
            .with(|c| c.borrow_mut().take())
            .unwrap_or_else(|| "malformed data".into());
        Err(LoadError::invalid(
            file,
            progress.describe(),
            format!("not a usable Parquet file: the decoder failed ({why})"),
        ))
    })
}
