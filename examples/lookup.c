/* lookup.c: look phrases up in a packed baler table from C, and walk the spans of sentences.
 *
 *   cc -Iinclude examples/lookup.c -Ltarget/release -lbaler -o lookup
 *   ./lookup [--bytes] TABLE PHRASE...            options of each phrase
 *   ./lookup [--bytes] TABLE --spans SENTENCE...  options of every sub-phrase (up to 7 tokens)
 *   (phrases before `--spans` are looked up, arguments after it are sentences)
 *
 * Prints interchange TSV (header line, then one line per option) exactly as `baler lookup`
 * prints it, without the `# key=value` metadata lines; for --spans, the options of every
 * sub-phrase found, by start then length. --bytes reads the file into memory, opens the table
 * from that buffer and frees the buffer at once (the library keeps its own copy).
 * Exit status: 0 when something was found, 1 when nothing was, 2 on an error. */

#define _POSIX_C_SOURCE 200809L /* strdup */

#include <float.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "baler.h"

static int report(BalerStatus status, const char *what) {
    fprintf(stderr, "lookup: %s failed with status %d: %s\n", what, (int)status,
            baler_last_error());
    return 2;
}

/* Writes a score the way the interchange TSV does: the shortest decimal that reads back as the
 * same double, positional for magnitudes in [1e-4, 1e15) and zero, otherwise as `1.5e-7`. */
static void print_score(FILE *out, double value) {
    char buf[64];
    int precision;
    for (precision = 1; precision <= 17; precision++) {
        snprintf(buf, sizeof buf, "%.*e", precision - 1, value);
        if (strtod(buf, NULL) == value) break;
    }
    /* buf is [-]D[.DDD]e[+-]XX: split into sign, digits and decimal exponent. */
    const char *p = buf;
    int negative = *p == '-';
    if (negative) p++;
    char digits[32];
    int n = 0;
    for (; *p != 'e'; p++)
        if (*p != '.') digits[n++] = *p;
    digits[n] = '\0';
    int exponent = atoi(p + 1);
    double magnitude = value < 0 ? -value : value;
    if (negative) fputc('-', out);
    if (value == 0.0) {
        fputc('0', out);
    } else if (magnitude >= 1e-4 && magnitude < 1e15) {
        if (exponent < 0) {
            fputs("0.", out);
            for (int k = 0; k < -exponent - 1; k++) fputc('0', out);
            fputs(digits, out);
        } else if (exponent + 1 >= n) {
            fputs(digits, out);
            for (int k = 0; k < exponent + 1 - n; k++) fputc('0', out);
        } else {
            fwrite(digits, 1, (size_t)exponent + 1, out);
            fputc('.', out);
            fputs(digits + exponent + 1, out);
        }
    } else {
        fputc(digits[0], out);
        if (n > 1) {
            fputc('.', out);
            fputs(digits + 1, out);
        }
        fprintf(out, "e%d", exponent);
    }
}

static void print_header(const BalerTable *table) {
    printf("source\ttarget");
    if (baler_table_has_alignment(table)) printf("\talignment");
    for (size_t i = 0; i < baler_table_score_count(table); i++)
        printf("\t%s", baler_table_score_name(table, i));
    for (size_t i = 0; i < baler_table_count_columns(table); i++)
        printf("\t%s", baler_table_count_name(table, i));
    printf("\n");
}

/* Checks that an option's word ids spell its target text; returns 0 when they do. */
static int check_ids(const BalerTable *table, const BalerOptions *options, size_t i) {
    size_t text_len, n_ids;
    const char *text = baler_option_target(options, i, &text_len);
    const uint32_t *ids = baler_option_target_ids(options, i, &n_ids);
    size_t at = 0;
    for (size_t k = 0; k < n_ids; k++) {
        size_t word_len;
        const char *word = baler_table_word(table, ids[k], &word_len);
        if (word == NULL) return -1;
        if (k > 0 && (at >= text_len || text[at++] != ' ')) return -1;
        if (at + word_len > text_len || memcmp(text + at, word, word_len) != 0) return -1;
        at += word_len;
    }
    return at == text_len ? 0 : -1;
}

/* Prints every option of `source` (`source_len` bytes); returns 0, or 2 on an error. */
static int print_options(const BalerTable *table, const char *source, size_t source_len,
                         const BalerOptions *options) {
    size_t n_scores = baler_table_score_count(table);
    size_t n_counts = baler_table_count_columns(table);
    int alignment = baler_table_has_alignment(table);
    BalerLink links[256];
    for (size_t i = 0; i < baler_options_len(options); i++) {
        size_t len;
        const char *target = baler_option_target(options, i, &len);
        if (check_ids(table, options, i) != 0) {
            fprintf(stderr, "lookup: the word ids of option %zu do not spell its target\n", i);
            return 2;
        }
        printf("%.*s\t%.*s", (int)source_len, source, (int)len, target);
        if (alignment) {
            size_t n = baler_option_alignment(options, i, links, 256);
            if (n > 256) {
                fprintf(stderr, "lookup: an option has more than 256 links\n");
                return 2;
            }
            putchar('\t');
            for (size_t k = 0; k < n; k++)
                printf("%s%u-%u", k ? " " : "", links[k].source, links[k].target);
        }
        const double *scores = baler_option_scores(options, i);
        for (size_t k = 0; k < n_scores; k++) {
            putchar('\t');
            print_score(stdout, scores[k]);
        }
        const uint64_t *counts = baler_option_counts(options, i);
        for (size_t k = 0; k < n_counts; k++) printf("\t%llu", (unsigned long long)counts[k]);
        putchar('\n');
    }
    return 0;
}

static BalerStatus open_from_memory(const char *path, BalerTable **table) {
    FILE *f = fopen(path, "rb");
    if (f == NULL) {
        perror(path);
        return BALER_STATUS_IO;
    }
    size_t cap = 1 << 16, len = 0, got;
    unsigned char *buf = malloc(cap);
    while (buf != NULL && (got = fread(buf + len, 1, cap - len, f)) > 0) {
        len += got;
        if (len == cap) {
            unsigned char *bigger = realloc(buf, cap *= 2);
            if (bigger == NULL) free(buf);
            buf = bigger;
        }
    }
    fclose(f);
    if (buf == NULL) return BALER_STATUS_IO;
    BalerStatus status = baler_table_open_bytes(buf, len, table);
    /* The library copied the bytes; the buffer can go now. */
    memset(buf, 0xAB, len);
    free(buf);
    return status;
}

/* Splits `sentence` at spaces into `tokens` (pointers into the sentence, which it modifies). */
static size_t tokenize(char *sentence, char **tokens, size_t max) {
    size_t n = 0;
    for (char *t = strtok(sentence, " "); t != NULL && n < max; t = strtok(NULL, " "))
        tokens[n++] = t;
    return n;
}

int main(int argc, char **argv) {
    int arg = 1, from_bytes = 0, spans = 0;
    if (arg < argc && strcmp(argv[arg], "--bytes") == 0) {
        from_bytes = 1;
        arg++;
    }
    if (arg >= argc) {
        fprintf(stderr, "usage: lookup [--bytes] TABLE [--spans] PHRASE...\n");
        return 2;
    }
    const char *path = argv[arg++];
    BalerTable *table = NULL;
    BalerStatus status =
        from_bytes ? open_from_memory(path, &table) : baler_table_open(path, &table);
    if (status != BALER_STATUS_OK) return report(status, "opening the table");

    print_header(table);
    int found = 0, failed = 0;
    BalerOptions *options = baler_options_new();
    for (; arg < argc && !failed; arg++) {
        if (!spans && strcmp(argv[arg], "--spans") == 0) {
            spans = 1;
            continue;
        }
        if (!spans) {
            status = baler_lookup(table, argv[arg], strlen(argv[arg]), options);
            if (status != BALER_STATUS_OK) {
                failed = report(status, "lookup");
                break;
            }
            found |= baler_options_len(options) > 0;
            failed = print_options(table, argv[arg], strlen(argv[arg]), options);
            continue;
        }
        char *sentence = strdup(argv[arg]);
        char *tokens[256];
        size_t n = tokenize(sentence, tokens, 256);
        BalerSpans *found_spans = NULL;
        status = baler_spans(table, (const char *const *)tokens, n, 7, &found_spans);
        if (status != BALER_STATUS_OK) {
            failed = report(status, "spans");
        }
        for (size_t i = 0; !failed && i < baler_spans_len(found_spans); i++) {
            size_t start, end;
            const BalerOptions *span_options = baler_span(found_spans, i, &start, &end);
            /* The source phrase: the span's tokens joined by single spaces. */
            char source[4096];
            size_t len = 0;
            for (size_t k = start; k < end; k++) {
                size_t w = strlen(tokens[k]);
                if (len + w + 1 >= sizeof source) break;
                if (k > start) source[len++] = ' ';
                memcpy(source + len, tokens[k], w);
                len += w;
            }
            found = 1;
            failed = print_options(table, source, len, span_options);
        }
        baler_spans_free(found_spans);
        free(sentence);
    }
    baler_options_free(options);
    baler_table_close(table);
    if (fflush(stdout) != 0) return 2;
    return failed ? 2 : found ? 0 : 1;
}
