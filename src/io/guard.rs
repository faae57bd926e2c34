//! A last guard around decoding that may panic on damaged input (a bug of
//! ours, or of a dependency such as the Parquet decoder): the panic becomes
//! an error the caller words, instead of ending the program with exit 101.
//! The panic message is still printed on standard error by the default
//! hook; the error that follows names the file.
//!
//! Some damage cannot be caught that way: an impossible allocation aborts
//! the process. [`parquet`] checks a Parquet file's structure before the
//! decoder reads it, for that reason.

pub mod parquet;

/// Runs `f`; a panic inside it (on this thread, or on a thread pool that
/// passes panics back, as rayon does) gives `Err` with the panic's message.
pub fn catch<T>(f: impl FnOnce() -> T) -> Result<T, String> {
    std::panic::catch_unwind(std::panic::AssertUnwindSafe(f)).map_err(|payload| {
        payload
            .downcast_ref::<&str>()
            .map(|s| s.to_string())
            .or_else(|| payload.downcast_ref::<String>().cloned())
            .unwrap_or_default()
    })
}
