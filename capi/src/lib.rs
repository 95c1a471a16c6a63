//! The C ABI of baler's packed-table reader: `libbaler` (shared and static) with the header
//! `include/baler.h`, generated from this file by cbindgen (see `capi/cbindgen.toml`; the test
//! `header` fails when the checked-in header is stale, `BALER_BLESS=1` rewrites it).
//!
//! Rules every entry point follows:
//!
//! * No panic crosses the boundary: each entry point runs under `catch_unwind`; a panic becomes
//!   [`BalerStatus::Internal`] (or a NULL / zero result for accessors).
//! * No pointer the caller passes in is kept after the call returns: paths and phrases are
//!   read during the call, and [`baler_table_open_bytes`] copies the buffer.
//! * Every returned pointer documents its owner and how long it stays valid.
//! * A table is shared by any number of threads; option and span results belong to one caller
//!   at a time (the same rules as `baler::Table` and `baler::read::Options` in Rust).
//! * The message of the last failed call is kept per thread ([`baler_last_error`]).

use std::cell::RefCell;
use std::ffi::{c_char, CStr, CString};
use std::panic::{catch_unwind, AssertUnwindSafe};
use std::path::Path;

use baler_core::read::{Options, Span};
use baler_core::{Error, Table};

/// Outcome of a call. Zero is success; every other value is an error whose message
/// `baler_last_error()` returns on the same thread.
#[repr(C)]
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum BalerStatus {
    /// Success.
    Ok = 0,
    /// A required pointer argument was NULL.
    NullArgument = 1,
    /// An argument is unusable (text that is not UTF-8, a zero `max_len`, ...).
    InvalidArgument = 2,
    /// The operating system refused an operation (file missing, unreadable, ...).
    Io = 3,
    /// The table is damaged or not a baler table: a failed check, never a crash.
    Corrupt = 4,
    /// The table uses a feature this library does not support.
    Unsupported = 5,
    /// A bug inside libbaler was caught at the boundary; please report it.
    Internal = 6,
}

/// An open packed table. Opaque; shared freely between threads.
pub struct BalerTable {
    table: Table,
    score_names: Vec<CString>,
    count_names: Vec<CString>,
}

/// The options of one source phrase (a lookup result). Opaque; one caller at a time.
pub struct BalerOptions {
    inner: Options,
}

/// Every sub-phrase of a sentence found in a table, each with its options. Opaque.
pub struct BalerSpans {
    spans: Vec<(usize, usize, BalerOptions)>,
}

/// One word link of an option's alignment: source token index and target token index,
/// both counted from 0 within the phrase pair.
#[repr(C)]
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub struct BalerLink {
    /// Token index in the source phrase.
    pub source: u16,
    /// Token index in the target phrase.
    pub target: u16,
}

thread_local! {
    static LAST_ERROR: RefCell<CString> = RefCell::new(CString::default());
}

fn set_error(message: String) {
    // Interior NUL bytes cannot appear in a C string; show them instead of truncating.
    let message = CString::new(message.replace('\0', "\\0")).unwrap_or_default();
    LAST_ERROR.with(|e| *e.borrow_mut() = message);
}

fn fail(status: BalerStatus, message: impl Into<String>) -> BalerStatus {
    set_error(message.into());
    status
}

fn from_error(e: Error) -> BalerStatus {
    let status = match &e {
        Error::Io { .. } => BalerStatus::Io,
        Error::Corrupt { .. } => BalerStatus::Corrupt,
        Error::Unsupported(_) => BalerStatus::Unsupported,
        Error::InvalidArgument { .. } | Error::Input { .. } => BalerStatus::InvalidArgument,
        _ => BalerStatus::Internal,
    };
    fail(status, e.to_string())
}

fn panic_message(payload: &(dyn std::any::Any + Send)) -> String {
    let what = payload
        .downcast_ref::<&str>()
        .map(|s| s.to_string())
        .or_else(|| payload.downcast_ref::<String>().cloned())
        .unwrap_or_else(|| "unknown panic".into());
    format!("internal error in libbaler (please report it): {what}")
}

/// Runs a status-returning body; a panic becomes [`BalerStatus::Internal`].
fn call(body: impl FnOnce() -> BalerStatus) -> BalerStatus {
    match catch_unwind(AssertUnwindSafe(body)) {
        Ok(status) => status,
        Err(payload) => fail(BalerStatus::Internal, panic_message(payload.as_ref())),
    }
}

/// Runs an accessor; a panic yields `fallback` (and sets the thread's message).
fn access<T>(fallback: T, body: impl FnOnce() -> T) -> T {
    match catch_unwind(AssertUnwindSafe(body)) {
        Ok(v) => v,
        Err(payload) => {
            set_error(panic_message(payload.as_ref()));
            fallback
        }
    }
}

/// Reads `len` bytes at `ptr` as UTF-8 text (an empty string when `len` is 0).
///
/// # Safety
/// `ptr` must be valid for reads of `len` bytes for the duration of the call.
unsafe fn text<'a>(ptr: *const c_char, len: usize) -> Result<&'a str, BalerStatus> {
    if len == 0 {
        return Ok("");
    }
    if ptr.is_null() {
        return Err(fail(BalerStatus::NullArgument, "the text pointer is NULL"));
    }
    // SAFETY: non-null, and the caller guarantees `len` readable bytes for this call; the
    // slice does not outlive the call.
    let bytes = unsafe { std::slice::from_raw_parts(ptr.cast::<u8>(), len) };
    std::str::from_utf8(bytes).map_err(|e| {
        fail(
            BalerStatus::InvalidArgument,
            format!("text is not UTF-8: {e}"),
        )
    })
}

fn wrap_table(table: Table) -> Box<BalerTable> {
    let schema = table.schema();
    let c = |s: &str| CString::new(s).unwrap_or_default();
    let score_names = schema.scores.iter().map(|s| c(s)).collect();
    let count_names = schema.counts.iter().map(|k| c(k.name())).collect();
    Box::new(BalerTable {
        table,
        score_names,
        count_names,
    })
}

/// Opens the packed table at `path` (a NUL-terminated UTF-8 path) by mapping it into memory.
///
/// On success stores a new table in `*out` and returns `BALER_STATUS_OK`; otherwise stores
/// NULL (when `out` is not NULL) and returns the error.
///
/// Ownership: the caller owns `*out` and releases it with `baler_table_close`. `path` is not
/// kept after the call. The file must not be modified in place while the table is open.
///
/// # Safety
/// `path` must be NULL or a NUL-terminated string; `out` must be NULL or writable.
#[no_mangle]
pub unsafe extern "C" fn baler_table_open(
    path: *const c_char,
    out: *mut *mut BalerTable,
) -> BalerStatus {
    call(|| {
        if out.is_null() {
            return fail(BalerStatus::NullArgument, "baler_table_open: `out` is NULL");
        }
        // SAFETY: `out` is non-null and writable by the contract above.
        unsafe { *out = std::ptr::null_mut() };
        if path.is_null() {
            return fail(
                BalerStatus::NullArgument,
                "baler_table_open: `path` is NULL",
            );
        }
        // SAFETY: non-null and NUL-terminated by the contract; only read during this call.
        let path = unsafe { CStr::from_ptr(path) };
        let Ok(path) = path.to_str() else {
            return fail(BalerStatus::InvalidArgument, "the path is not UTF-8");
        };
        match Table::open(Path::new(path)) {
            Ok(table) => {
                // SAFETY: as above.
                unsafe { *out = Box::into_raw(wrap_table(table)) };
                BalerStatus::Ok
            }
            Err(e) => from_error(e),
        }
    })
}

/// Opens a packed table from `len` bytes at `data` (e.g. an asset the app read into memory).
///
/// The bytes are copied: the caller may free or reuse `data` as soon as the call returns.
/// On success stores a new table in `*out`; otherwise stores NULL and returns the error.
///
/// Ownership: the caller owns `*out` and releases it with `baler_table_close`.
///
/// # Safety
/// `data` must be valid for reads of `len` bytes during the call; `out` must be NULL or
/// writable.
#[no_mangle]
pub unsafe extern "C" fn baler_table_open_bytes(
    data: *const u8,
    len: usize,
    out: *mut *mut BalerTable,
) -> BalerStatus {
    call(|| {
        if out.is_null() {
            return fail(
                BalerStatus::NullArgument,
                "baler_table_open_bytes: `out` is NULL",
            );
        }
        // SAFETY: `out` is non-null and writable by the contract above.
        unsafe { *out = std::ptr::null_mut() };
        let bytes = if len == 0 {
            Vec::new()
        } else if data.is_null() {
            return fail(
                BalerStatus::NullArgument,
                "baler_table_open_bytes: `data` is NULL",
            );
        } else {
            // SAFETY: non-null and readable for `len` bytes during this call; copied at once.
            unsafe { std::slice::from_raw_parts(data, len) }.to_vec()
        };
        match Table::from_bytes(bytes) {
            Ok(table) => {
                // SAFETY: as above.
                unsafe { *out = Box::into_raw(wrap_table(table)) };
                BalerStatus::Ok
            }
            Err(e) => from_error(e),
        }
    })
}

/// Closes a table and frees everything it owns (score names, words). NULL is ignored.
///
/// Results (`BalerOptions`, `BalerSpans`) do not borrow from the table and stay valid.
///
/// # Safety
/// `table` must be NULL or a table from `baler_table_open*` not closed before, and no other
/// thread may be using it.
#[no_mangle]
pub unsafe extern "C" fn baler_table_close(table: *mut BalerTable) {
    if table.is_null() {
        return;
    }
    access((), || {
        // SAFETY: created by Box::into_raw in baler_table_open*, released only here.
        drop(unsafe { Box::from_raw(table) });
    })
}

/// Borrows a table for the duration of a call.
///
/// # Safety
/// `table` must be NULL or a live table.
unsafe fn table_ref<'a>(table: *const BalerTable) -> Option<&'a BalerTable> {
    // SAFETY: NULL or a live table by the caller's contract.
    unsafe { table.as_ref() }
}

/// The number of phrase pairs in the table (0 when `table` is NULL).
///
/// # Safety
/// `table` must be NULL or a live table.
#[no_mangle]
pub unsafe extern "C" fn baler_table_pairs(table: *const BalerTable) -> u64 {
    // SAFETY: forwarded contract.
    access(0, || {
        unsafe { table_ref(table) }.map_or(0, |t| t.table.pairs())
    })
}

/// The number of distinct source phrases (0 when `table` is NULL).
///
/// # Safety
/// `table` must be NULL or a live table.
#[no_mangle]
pub unsafe extern "C" fn baler_table_sources(table: *const BalerTable) -> u64 {
    // SAFETY: forwarded contract.
    access(0, || {
        unsafe { table_ref(table) }.map_or(0, |t| t.table.sources())
    })
}

/// The number of score columns; each option has this many scores.
///
/// # Safety
/// `table` must be NULL or a live table.
#[no_mangle]
pub unsafe extern "C" fn baler_table_score_count(table: *const BalerTable) -> usize {
    // SAFETY: forwarded contract.
    access(0, || {
        unsafe { table_ref(table) }.map_or(0, |t| t.score_names.len())
    })
}

/// The name of score column `i` (NUL-terminated UTF-8), or NULL when `i` is out of range.
///
/// Ownership: owned by the table; valid until `baler_table_close`.
///
/// # Safety
/// `table` must be NULL or a live table.
#[no_mangle]
pub unsafe extern "C" fn baler_table_score_name(
    table: *const BalerTable,
    i: usize,
) -> *const c_char {
    access(std::ptr::null(), || {
        // SAFETY: forwarded contract.
        unsafe { table_ref(table) }
            .and_then(|t| t.score_names.get(i))
            .map_or(std::ptr::null(), |s| s.as_ptr())
    })
}

/// The number of exact count columns; each option has this many counts.
///
/// # Safety
/// `table` must be NULL or a live table.
#[no_mangle]
pub unsafe extern "C" fn baler_table_count_columns(table: *const BalerTable) -> usize {
    // SAFETY: forwarded contract.
    access(0, || {
        unsafe { table_ref(table) }.map_or(0, |t| t.count_names.len())
    })
}

/// The name of count column `i` (e.g. `count`, `cooc`), or NULL when `i` is out of range.
///
/// Ownership: owned by the table; valid until `baler_table_close`.
///
/// # Safety
/// `table` must be NULL or a live table.
#[no_mangle]
pub unsafe extern "C" fn baler_table_count_name(
    table: *const BalerTable,
    i: usize,
) -> *const c_char {
    access(std::ptr::null(), || {
        // SAFETY: forwarded contract.
        unsafe { table_ref(table) }
            .and_then(|t| t.count_names.get(i))
            .map_or(std::ptr::null(), |s| s.as_ptr())
    })
}

/// Whether options carry word alignments.
///
/// # Safety
/// `table` must be NULL or a live table.
#[no_mangle]
pub unsafe extern "C" fn baler_table_has_alignment(table: *const BalerTable) -> bool {
    access(false, || {
        // SAFETY: forwarded contract.
        unsafe { table_ref(table) }.is_some_and(|t| t.table.schema().alignment)
    })
}

/// The number of words in the target vocabulary; word ids run from 0 to this minus one.
///
/// # Safety
/// `table` must be NULL or a live table.
#[no_mangle]
pub unsafe extern "C" fn baler_table_vocabulary_size(table: *const BalerTable) -> usize {
    access(0, || {
        // SAFETY: forwarded contract.
        unsafe { table_ref(table) }.map_or(0, |t| t.table.vocabulary_size())
    })
}

/// The text of target word `id`: `*len` bytes of UTF-8, NOT NUL-terminated; NULL when `id` is
/// outside the vocabulary (or its entry is damaged).
///
/// Ownership: points into the table; valid until `baler_table_close`.
///
/// # Safety
/// `table` must be NULL or a live table; `len` must be NULL or writable.
#[no_mangle]
pub unsafe extern "C" fn baler_table_word(
    table: *const BalerTable,
    id: u32,
    len: *mut usize,
) -> *const c_char {
    access(std::ptr::null(), || {
        // SAFETY: forwarded contract.
        let word = unsafe { table_ref(table) }.and_then(|t| t.table.word(id));
        // SAFETY: `len` is NULL or writable by the contract.
        if let Some(len) = unsafe { len.as_mut() } {
            *len = word.map_or(0, str::len);
        }
        word.map_or(std::ptr::null(), |w| w.as_ptr().cast())
    })
}

/// A new, empty result to pass to `baler_lookup`. Reusing one result for many lookups keeps
/// its buffers and avoids allocating per lookup. NULL only if memory is exhausted.
///
/// Ownership: the caller owns it and releases it with `baler_options_free`. It does not
/// borrow from any table.
#[no_mangle]
pub extern "C" fn baler_options_new() -> *mut BalerOptions {
    access(std::ptr::null_mut(), || {
        Box::into_raw(Box::new(BalerOptions {
            inner: Options::default(),
        }))
    })
}

/// Frees a result from `baler_options_new`. NULL is ignored.
///
/// # Safety
/// `options` must be NULL or from `baler_options_new`, not freed before; pointers obtained
/// from it become invalid.
#[no_mangle]
pub unsafe extern "C" fn baler_options_free(options: *mut BalerOptions) {
    if options.is_null() {
        return;
    }
    access((), || {
        // SAFETY: created by Box::into_raw in baler_options_new, released only here.
        drop(unsafe { Box::from_raw(options) });
    })
}

/// Looks up the source phrase of `len` UTF-8 bytes at `phrase` (tokens separated by single
/// spaces; no NUL terminator needed) and replaces the contents of `into` with its options.
///
/// Returns `BALER_STATUS_OK` whether or not the phrase is in the table:
/// `baler_options_len(into)` is 0 when it is not. On error `into` is left empty.
/// Pointers previously obtained from `into` become invalid.
///
/// Thread safety: any number of threads may look up in one table at once, each with its own
/// `into`.
///
/// # Safety
/// `table` must be NULL or a live table; `phrase` must be readable for `len` bytes during the
/// call; `into` must be NULL or a live result not used by another thread.
#[no_mangle]
pub unsafe extern "C" fn baler_lookup(
    table: *const BalerTable,
    phrase: *const c_char,
    len: usize,
    into: *mut BalerOptions,
) -> BalerStatus {
    call(|| {
        // SAFETY: forwarded contract.
        let Some(table) = (unsafe { table_ref(table) }) else {
            return fail(BalerStatus::NullArgument, "baler_lookup: `table` is NULL");
        };
        // SAFETY: NULL or a live result exclusive to this caller.
        let Some(into) = (unsafe { into.as_mut() }) else {
            return fail(BalerStatus::NullArgument, "baler_lookup: `into` is NULL");
        };
        // SAFETY: `phrase` readable for `len` bytes during this call.
        let phrase = match unsafe { text(phrase, len) } {
            Ok(p) => p,
            Err(status) => return status,
        };
        match table.table.lookup_into(phrase, &mut into.inner) {
            Ok(_) => BalerStatus::Ok,
            Err(e) => {
                into.inner = Options::default();
                from_error(e)
            }
        }
    })
}

/// Borrows a result for the duration of a call.
///
/// # Safety
/// `options` must be NULL or a live result.
unsafe fn options_ref<'a>(options: *const BalerOptions) -> Option<&'a Options> {
    // SAFETY: NULL or live by the caller's contract.
    unsafe { options.as_ref() }.map(|o| &o.inner)
}

/// The number of options in a result (0 when the phrase was not found).
///
/// # Safety
/// `options` must be NULL or a live result.
#[no_mangle]
pub unsafe extern "C" fn baler_options_len(options: *const BalerOptions) -> usize {
    // SAFETY: forwarded contract.
    access(0, || {
        unsafe { options_ref(options) }.map_or(0, Options::len)
    })
}

/// The target phrase of option `i`: `*len` bytes of UTF-8 (words separated by single spaces),
/// NOT NUL-terminated. NULL when `i` is out of range.
///
/// Ownership: owned by the result; valid until the result is reused or freed.
///
/// # Safety
/// `options` must be NULL or a live result; `len` must be NULL or writable.
#[no_mangle]
pub unsafe extern "C" fn baler_option_target(
    options: *const BalerOptions,
    i: usize,
    len: *mut usize,
) -> *const c_char {
    access(std::ptr::null(), || {
        // SAFETY: forwarded contract.
        let target = unsafe { options_ref(options) }.and_then(|o| o.get(i).map(|o| o.target()));
        // SAFETY: `len` is NULL or writable by the contract.
        if let Some(len) = unsafe { len.as_mut() } {
            *len = target.map_or(0, str::len);
        }
        target.map_or(std::ptr::null(), |t| t.as_ptr().cast())
    })
}

/// The target phrase of option `i` as `*len` word ids (see `baler_table_word`). NULL when `i`
/// is out of range.
///
/// Ownership: owned by the result; valid until the result is reused or freed.
///
/// # Safety
/// `options` must be NULL or a live result; `len` must be NULL or writable.
#[no_mangle]
pub unsafe extern "C" fn baler_option_target_ids(
    options: *const BalerOptions,
    i: usize,
    len: *mut usize,
) -> *const u32 {
    access(std::ptr::null(), || {
        // SAFETY: forwarded contract.
        let ids = unsafe { options_ref(options) }.and_then(|o| o.get(i).map(|o| o.target_ids()));
        // SAFETY: `len` is NULL or writable by the contract.
        if let Some(len) = unsafe { len.as_mut() } {
            *len = ids.map_or(0, <[u32]>::len);
        }
        ids.map_or(std::ptr::null(), <[u32]>::as_ptr)
    })
}

/// The scores of option `i`, `baler_table_score_count(table)` values in column order
/// (quantized values where the table quantizes). NULL when `i` is out of range; when the
/// table has no score columns the pointer must not be read.
///
/// Ownership: owned by the result; valid until the result is reused or freed.
///
/// # Safety
/// `options` must be NULL or a live result.
#[no_mangle]
pub unsafe extern "C" fn baler_option_scores(options: *const BalerOptions, i: usize) -> *const f64 {
    access(std::ptr::null(), || {
        // SAFETY: forwarded contract.
        unsafe { options_ref(options) }
            .and_then(|o| o.get(i))
            .map_or(std::ptr::null(), |o| o.scores().as_ptr())
    })
}

/// The exact counts of option `i`, `baler_table_count_columns(table)` values in column order.
/// NULL when `i` is out of range; when the table stores no counts the pointer must not be
/// read.
///
/// Ownership: owned by the result; valid until the result is reused or freed.
///
/// # Safety
/// `options` must be NULL or a live result.
#[no_mangle]
pub unsafe extern "C" fn baler_option_counts(options: *const BalerOptions, i: usize) -> *const u64 {
    access(std::ptr::null(), || {
        // SAFETY: forwarded contract.
        unsafe { options_ref(options) }
            .and_then(|o| o.get(i))
            .map_or(std::ptr::null(), |o| o.counts().as_ptr())
    })
}

/// Copies up to `capacity` word links of option `i` into `links` and returns how many links
/// the option has (0 when the table stores no alignments or `i` is out of range). Call with
/// `capacity` 0 to learn the size.
///
/// # Safety
/// `options` must be NULL or a live result; `links` must be writable for `capacity` links
/// (it may be NULL when `capacity` is 0).
#[no_mangle]
pub unsafe extern "C" fn baler_option_alignment(
    options: *const BalerOptions,
    i: usize,
    links: *mut BalerLink,
    capacity: usize,
) -> usize {
    access(0, || {
        // SAFETY: forwarded contract.
        let Some(option) = unsafe { options_ref(options) }.and_then(|o| o.get(i)) else {
            return 0;
        };
        let all = option.alignment();
        if !links.is_null() {
            for (k, &(source, target)) in all.iter().take(capacity).enumerate() {
                // SAFETY: `links` is writable for `capacity` links and `k < capacity`.
                unsafe { links.add(k).write(BalerLink { source, target }) };
            }
        }
        all.len()
    })
}

/// Finds every sub-phrase of the sentence `tokens[0..n_tokens]` (NUL-terminated UTF-8 tokens)
/// of at most `max_len` tokens that is in the table, with its options, ordered by start then
/// length. On success stores the spans in `*out`; otherwise stores NULL.
///
/// Ownership: the caller owns `*out` and releases it with `baler_spans_free`; it does not
/// borrow from the table or from `tokens`.
///
/// # Safety
/// `table` must be NULL or a live table; `tokens` must hold `n_tokens` NUL-terminated strings
/// (it may be NULL when `n_tokens` is 0); `out` must be NULL or writable.
#[no_mangle]
pub unsafe extern "C" fn baler_spans(
    table: *const BalerTable,
    tokens: *const *const c_char,
    n_tokens: usize,
    max_len: usize,
    out: *mut *mut BalerSpans,
) -> BalerStatus {
    call(|| {
        if out.is_null() {
            return fail(BalerStatus::NullArgument, "baler_spans: `out` is NULL");
        }
        // SAFETY: `out` is non-null and writable by the contract.
        unsafe { *out = std::ptr::null_mut() };
        // SAFETY: forwarded contract.
        let Some(table) = (unsafe { table_ref(table) }) else {
            return fail(BalerStatus::NullArgument, "baler_spans: `table` is NULL");
        };
        if max_len == 0 {
            return fail(BalerStatus::InvalidArgument, "baler_spans: `max_len` is 0");
        }
        let mut words: Vec<&str> = Vec::with_capacity(n_tokens);
        if n_tokens > 0 {
            if tokens.is_null() {
                return fail(BalerStatus::NullArgument, "baler_spans: `tokens` is NULL");
            }
            for k in 0..n_tokens {
                // SAFETY: `tokens` holds `n_tokens` pointers, readable during the call.
                let token = unsafe { *tokens.add(k) };
                if token.is_null() {
                    return fail(
                        BalerStatus::NullArgument,
                        format!("baler_spans: token {k} is NULL"),
                    );
                }
                // SAFETY: each token is NUL-terminated; the borrow ends with this call.
                match unsafe { CStr::from_ptr(token) }.to_str() {
                    Ok(w) => words.push(w),
                    Err(_) => {
                        return fail(
                            BalerStatus::InvalidArgument,
                            format!("baler_spans: token {k} is not UTF-8"),
                        )
                    }
                }
            }
        }
        match table.table.spans(&words, max_len) {
            Ok(spans) => {
                let spans = spans
                    .into_iter()
                    .map(
                        |Span {
                             start,
                             end,
                             options,
                         }| {
                            (start, end, BalerOptions { inner: options })
                        },
                    )
                    .collect();
                // SAFETY: as above.
                unsafe { *out = Box::into_raw(Box::new(BalerSpans { spans })) };
                BalerStatus::Ok
            }
            Err(e) => from_error(e),
        }
    })
}

/// The number of spans found.
///
/// # Safety
/// `spans` must be NULL or live spans.
#[no_mangle]
pub unsafe extern "C" fn baler_spans_len(spans: *const BalerSpans) -> usize {
    // SAFETY: NULL or live by the contract.
    access(0, || unsafe { spans.as_ref() }.map_or(0, |s| s.spans.len()))
}

/// Span `i`: stores its first token in `*start` and one past its last token in `*end`, and
/// returns its options (read them with the `baler_option*` functions). NULL when `i` is out of
/// range.
///
/// Ownership: the options are owned by `spans`; valid until `baler_spans_free`. Do not pass
/// them to `baler_lookup` or `baler_options_free`.
///
/// # Safety
/// `spans` must be NULL or live spans; `start` and `end` must be NULL or writable.
#[no_mangle]
pub unsafe extern "C" fn baler_span(
    spans: *const BalerSpans,
    i: usize,
    start: *mut usize,
    end: *mut usize,
) -> *const BalerOptions {
    access(std::ptr::null(), || {
        // SAFETY: NULL or live by the contract.
        let Some((first, past, options)) = unsafe { spans.as_ref() }.and_then(|s| s.spans.get(i))
        else {
            return std::ptr::null();
        };
        // SAFETY: NULL or writable by the contract.
        if let Some(start) = unsafe { start.as_mut() } {
            *start = *first;
        }
        // SAFETY: NULL or writable by the contract.
        if let Some(end) = unsafe { end.as_mut() } {
            *end = *past;
        }
        std::ptr::from_ref(options)
    })
}

/// Frees spans from `baler_spans`. NULL is ignored.
///
/// # Safety
/// `spans` must be NULL or from `baler_spans`, not freed before; pointers obtained from it
/// become invalid.
#[no_mangle]
pub unsafe extern "C" fn baler_spans_free(spans: *mut BalerSpans) {
    if spans.is_null() {
        return;
    }
    access((), || {
        // SAFETY: created by Box::into_raw in baler_spans, released only here.
        drop(unsafe { Box::from_raw(spans) });
    })
}

/// The message of the last call on this thread that returned an error (NUL-terminated UTF-8;
/// empty when none failed yet). Successful calls leave it unchanged.
///
/// Ownership: owned by the library, per thread; valid until the next failing call on the same
/// thread.
#[no_mangle]
pub extern "C" fn baler_last_error() -> *const c_char {
    access(std::ptr::null(), || {
        LAST_ERROR.with(|e| e.borrow().as_ptr())
    })
}

/// The library's version (NUL-terminated). Ownership: static; never free it.
#[no_mangle]
pub extern "C" fn baler_version() -> *const c_char {
    static VERSION: &CStr =
        match CStr::from_bytes_with_nul(concat!(env!("CARGO_PKG_VERSION"), "\0").as_bytes()) {
            Ok(v) => v,
            Err(_) => panic!("version string"),
        };
    VERSION.as_ptr()
}
