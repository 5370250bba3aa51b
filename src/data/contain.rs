//! Third-party readers over untrusted bytes: a panic inside one becomes an error value.
//!
//! The workbook reader (calamine) is not ours, and a malformed file can make it panic — fuzzing
//! found an overflowing cell reference in an `.xlsx` sheet that did (calamine 0.30.1, its row
//! parser). Such a file must give an input error naming the file, never a crash. While a
//! contained call runs, the panic hook stays silent on that thread (the error is reported by
//! the caller instead); elsewhere the previous hook runs as before.

use std::cell::Cell;
use std::panic::{self, AssertUnwindSafe};
use std::sync::Once;

thread_local! {
    /// Whether this thread is inside [`contain`] (the hook then prints nothing).
    static CONTAINED: Cell<bool> = const { Cell::new(false) };
}

static HOOK: Once = Once::new();

/// Run `f`; a panic inside it is caught and returned as its message.
///
/// `f` must not leave shared state half-updated when it panics: the callers pass closures
/// that only read the input bytes and build fresh values.
pub fn contain<T>(f: impl FnOnce() -> T) -> Result<T, String> {
    HOOK.call_once(|| {
        let previous = panic::take_hook();
        panic::set_hook(Box::new(move |info| {
            if !CONTAINED.with(Cell::get) {
                previous(info);
            }
        }));
    });
    let outer = CONTAINED.with(|c| c.replace(true));
    let out = panic::catch_unwind(AssertUnwindSafe(f));
    CONTAINED.with(|c| c.set(outer));
    out.map_err(|payload| {
        payload
            .downcast_ref::<&str>()
            .map(|s| (*s).to_string())
            .or_else(|| payload.downcast_ref::<String>().cloned())
            .unwrap_or_else(|| "no message".to_string())
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_panic_inside_becomes_its_message_and_the_flag_is_restored() {
        let caught = contain(|| -> u32 { panic!("bad cell reference") });
        assert_eq!(caught, Err("bad cell reference".to_string()));
        let formatted = contain(|| -> u32 { panic!("row {}", 7) });
        assert_eq!(formatted, Err("row 7".to_string()));
        assert_eq!(contain(|| 41 + 1), Ok(42));
        // Nested: the inner call restores the outer state.
        let nested = contain(|| {
            let inner = contain(|| -> u8 { panic!("inner") });
            (inner, CONTAINED.with(Cell::get))
        });
        assert_eq!(nested, Ok((Err("inner".to_string()), true)));
        assert!(!CONTAINED.with(Cell::get));
    }
}
