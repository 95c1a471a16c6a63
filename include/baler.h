/* baler.h: C interface of libbaler, the baler phrase-table reader.
 *
 * GENERATED from capi/src/lib.rs by cbindgen (capi/cbindgen.toml); do not edit by hand.
 *
 * Link with -lbaler (shared) or libbaler.a (static; then also -lpthread -ldl -lm).
 * Every function is safe to call with NULL handles: it returns an error status, NULL or 0.
 * A table may be shared by many threads; a result (BalerOptions, BalerSpans) belongs to one
 * thread at a time. No pointer passed in is kept after a call returns. Each returned pointer
 * names its owner and lifetime below ("Ownership:"). Error messages: baler_last_error(). */

#ifndef BALER_H
#define BALER_H

#include <stdbool.h>
#include <stddef.h>
#include <stdint.h>

// Outcome of a call. Zero is success; every other value is an error whose message
// `baler_last_error()` returns on the same thread.
typedef enum {
  // Success.
  BALER_STATUS_OK = 0,
  // A required pointer argument was NULL.
  BALER_STATUS_NULL_ARGUMENT = 1,
  // An argument is unusable (text that is not UTF-8, a zero `max_len`, ...).
  BALER_STATUS_INVALID_ARGUMENT = 2,
  // The operating system refused an operation (file missing, unreadable, ...).
  BALER_STATUS_IO = 3,
  // The table is damaged or not a baler table: a failed check, never a crash.
  BALER_STATUS_CORRUPT = 4,
  // The table uses a feature this library does not support.
  BALER_STATUS_UNSUPPORTED = 5,
  // A bug inside libbaler was caught at the boundary; please report it.
  BALER_STATUS_INTERNAL = 6,
} BalerStatus;

// The options of one source phrase (a lookup result). Opaque; one caller at a time.
typedef struct BalerOptions BalerOptions;

// Every sub-phrase of a sentence found in a table, each with its options. Opaque.
typedef struct BalerSpans BalerSpans;

// An open packed table. Opaque; shared freely between threads.
typedef struct BalerTable BalerTable;

// One word link of an option's alignment: source token index and target token index,
// both counted from 0 within the phrase pair.
typedef struct {
  // Token index in the source phrase.
  uint16_t source;
  // Token index in the target phrase.
  uint16_t target;
} BalerLink;

#ifdef __cplusplus
extern "C" {
#endif // __cplusplus

// Opens the packed table at `path` (a NUL-terminated UTF-8 path) by mapping it into memory.
//
// On success stores a new table in `*out` and returns `BALER_STATUS_OK`; otherwise stores
// NULL (when `out` is not NULL) and returns the error.
//
// Ownership: the caller owns `*out` and releases it with `baler_table_close`. `path` is not
// kept after the call. The file must not be modified in place while the table is open.
//
// # Safety
// `path` must be NULL or a NUL-terminated string; `out` must be NULL or writable.
BalerStatus baler_table_open(const char *path, BalerTable **out);

// Opens a packed table from `len` bytes at `data` (e.g. an asset the app read into memory).
//
// The bytes are copied: the caller may free or reuse `data` as soon as the call returns.
// On success stores a new table in `*out`; otherwise stores NULL and returns the error.
//
// Ownership: the caller owns `*out` and releases it with `baler_table_close`.
//
// # Safety
// `data` must be valid for reads of `len` bytes during the call; `out` must be NULL or
// writable.
BalerStatus baler_table_open_bytes(const uint8_t *data, uintptr_t len, BalerTable **out);

// Closes a table and frees everything it owns (score names, words). NULL is ignored.
//
// Results (`BalerOptions`, `BalerSpans`) do not borrow from the table and stay valid.
//
// # Safety
// `table` must be NULL or a table from `baler_table_open*` not closed before, and no other
// thread may be using it.
void baler_table_close(BalerTable *table);

// The number of phrase pairs in the table (0 when `table` is NULL).
//
// # Safety
// `table` must be NULL or a live table.
uint64_t baler_table_pairs(const BalerTable *table);

// The number of distinct source phrases (0 when `table` is NULL).
//
// # Safety
// `table` must be NULL or a live table.
uint64_t baler_table_sources(const BalerTable *table);

// The number of score columns; each option has this many scores.
//
// # Safety
// `table` must be NULL or a live table.
uintptr_t baler_table_score_count(const BalerTable *table);

// The name of score column `i` (NUL-terminated UTF-8), or NULL when `i` is out of range.
//
// Ownership: owned by the table; valid until `baler_table_close`.
//
// # Safety
// `table` must be NULL or a live table.
const char *baler_table_score_name(const BalerTable *table, uintptr_t i);

// The number of exact count columns; each option has this many counts.
//
// # Safety
// `table` must be NULL or a live table.
uintptr_t baler_table_count_columns(const BalerTable *table);

// The name of count column `i` (e.g. `count`, `cooc`), or NULL when `i` is out of range.
//
// Ownership: owned by the table; valid until `baler_table_close`.
//
// # Safety
// `table` must be NULL or a live table.
const char *baler_table_count_name(const BalerTable *table, uintptr_t i);

// Whether options carry word alignments.
//
// # Safety
// `table` must be NULL or a live table.
bool baler_table_has_alignment(const BalerTable *table);

// The number of words in the target vocabulary; word ids run from 0 to this minus one.
//
// # Safety
// `table` must be NULL or a live table.
uintptr_t baler_table_vocabulary_size(const BalerTable *table);

// The text of target word `id`: `*len` bytes of UTF-8, NOT NUL-terminated; NULL when `id` is
// outside the vocabulary (or its entry is damaged).
//
// Ownership: points into the table; valid until `baler_table_close`.
//
// # Safety
// `table` must be NULL or a live table; `len` must be NULL or writable.
const char *baler_table_word(const BalerTable *table, uint32_t id, uintptr_t *len);

// A new, empty result to pass to `baler_lookup`. Reusing one result for many lookups keeps
// its buffers and avoids allocating per lookup. NULL only if memory is exhausted.
//
// Ownership: the caller owns it and releases it with `baler_options_free`. It does not
// borrow from any table.
BalerOptions *baler_options_new(void);

// Frees a result from `baler_options_new`. NULL is ignored.
//
// # Safety
// `options` must be NULL or from `baler_options_new`, not freed before; pointers obtained
// from it become invalid.
void baler_options_free(BalerOptions *options);

// Looks up the source phrase of `len` UTF-8 bytes at `phrase` (tokens separated by single
// spaces; no NUL terminator needed) and replaces the contents of `into` with its options.
//
// Returns `BALER_STATUS_OK` whether or not the phrase is in the table:
// `baler_options_len(into)` is 0 when it is not. On error `into` is left empty.
// Pointers previously obtained from `into` become invalid.
//
// Thread safety: any number of threads may look up in one table at once, each with its own
// `into`.
//
// # Safety
// `table` must be NULL or a live table; `phrase` must be readable for `len` bytes during the
// call; `into` must be NULL or a live result not used by another thread.
BalerStatus baler_lookup(const BalerTable *table,
                         const char *phrase,
                         uintptr_t len,
                         BalerOptions *into);

// The number of options in a result (0 when the phrase was not found).
//
// # Safety
// `options` must be NULL or a live result.
uintptr_t baler_options_len(const BalerOptions *options);

// The target phrase of option `i`: `*len` bytes of UTF-8 (words separated by single spaces),
// NOT NUL-terminated. NULL when `i` is out of range.
//
// Ownership: owned by the result; valid until the result is reused or freed.
//
// # Safety
// `options` must be NULL or a live result; `len` must be NULL or writable.
const char *baler_option_target(const BalerOptions *options, uintptr_t i, uintptr_t *len);

// The target phrase of option `i` as `*len` word ids (see `baler_table_word`). NULL when `i`
// is out of range.
//
// Ownership: owned by the result; valid until the result is reused or freed.
//
// # Safety
// `options` must be NULL or a live result; `len` must be NULL or writable.
const uint32_t *baler_option_target_ids(const BalerOptions *options, uintptr_t i, uintptr_t *len);

// The scores of option `i`, `baler_table_score_count(table)` values in column order
// (quantized values where the table quantizes). NULL when `i` is out of range; when the
// table has no score columns the pointer must not be read.
//
// Ownership: owned by the result; valid until the result is reused or freed.
//
// # Safety
// `options` must be NULL or a live result.
const double *baler_option_scores(const BalerOptions *options, uintptr_t i);

// The exact counts of option `i`, `baler_table_count_columns(table)` values in column order.
// NULL when `i` is out of range; when the table stores no counts the pointer must not be
// read.
//
// Ownership: owned by the result; valid until the result is reused or freed.
//
// # Safety
// `options` must be NULL or a live result.
const uint64_t *baler_option_counts(const BalerOptions *options, uintptr_t i);

// Copies up to `capacity` word links of option `i` into `links` and returns how many links
// the option has (0 when the table stores no alignments or `i` is out of range). Call with
// `capacity` 0 to learn the size.
//
// # Safety
// `options` must be NULL or a live result; `links` must be writable for `capacity` links
// (it may be NULL when `capacity` is 0).
uintptr_t baler_option_alignment(const BalerOptions *options,
                                 uintptr_t i,
                                 BalerLink *links,
                                 uintptr_t capacity);

// Finds every sub-phrase of the sentence `tokens[0..n_tokens]` (NUL-terminated UTF-8 tokens)
// of at most `max_len` tokens that is in the table, with its options, ordered by start then
// length. On success stores the spans in `*out`; otherwise stores NULL.
//
// Ownership: the caller owns `*out` and releases it with `baler_spans_free`; it does not
// borrow from the table or from `tokens`.
//
// # Safety
// `table` must be NULL or a live table; `tokens` must hold `n_tokens` NUL-terminated strings
// (it may be NULL when `n_tokens` is 0); `out` must be NULL or writable.
BalerStatus baler_spans(const BalerTable *table,
                        const char *const *tokens,
                        uintptr_t n_tokens,
                        uintptr_t max_len,
                        BalerSpans **out);

// The number of spans found.
//
// # Safety
// `spans` must be NULL or live spans.
uintptr_t baler_spans_len(const BalerSpans *spans);

// Span `i`: stores its first token in `*start` and one past its last token in `*end`, and
// returns its options (read them with the `baler_option*` functions). NULL when `i` is out of
// range.
//
// Ownership: the options are owned by `spans`; valid until `baler_spans_free`. Do not pass
// them to `baler_lookup` or `baler_options_free`.
//
// # Safety
// `spans` must be NULL or live spans; `start` and `end` must be NULL or writable.
const BalerOptions *baler_span(const BalerSpans *spans,
                               uintptr_t i,
                               uintptr_t *start,
                               uintptr_t *end);

// Frees spans from `baler_spans`. NULL is ignored.
//
// # Safety
// `spans` must be NULL or from `baler_spans`, not freed before; pointers obtained from it
// become invalid.
void baler_spans_free(BalerSpans *spans);

// The message of the last call on this thread that returned an error (NUL-terminated UTF-8;
// empty when none failed yet). Successful calls leave it unchanged.
//
// Ownership: owned by the library, per thread; valid until the next failing call on the same
// thread.
const char *baler_last_error(void);

// The library's version (NUL-terminated). Ownership: static; never free it.
const char *baler_version(void);

#ifdef __cplusplus
}  // extern "C"
#endif  // __cplusplus

#endif  /* BALER_H */
