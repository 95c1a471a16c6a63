/* One table shared by several threads, each with its own result: every thread looks up every
 * phrase given on the command line many times and must find what the main thread found alone.
 * Usage: threads TABLE PHRASE...; exit 0 when all agree. */
#define _POSIX_C_SOURCE 200809L

#include <pthread.h>
#include <stdio.h>
#include <string.h>

#include "baler.h"

#define THREADS 4
#define REPEATS 200

static const BalerTable *table;
static char **phrases;
static int n_phrases;
static unsigned long long expected;

/* A fingerprint of a phrase's options: target bytes, scores and counts. */
static unsigned long long fingerprint(BalerOptions *options, const char *phrase) {
    unsigned long long h = 1469598103934665603ull;
    if (baler_lookup(table, phrase, strlen(phrase), options) != BALER_STATUS_OK) return 0;
    for (size_t i = 0; i < baler_options_len(options); i++) {
        size_t len;
        const char *t = baler_option_target(options, i, &len);
        for (size_t k = 0; k < len; k++) h = (h ^ (unsigned char)t[k]) * 1099511628211ull;
        const double *s = baler_option_scores(options, i);
        for (size_t k = 0; k < baler_table_score_count(table); k++) {
            unsigned long long bits;
            memcpy(&bits, &s[k], sizeof bits);
            h = (h ^ bits) * 1099511628211ull;
        }
        const uint64_t *c = baler_option_counts(options, i);
        for (size_t k = 0; k < baler_table_count_columns(table); k++)
            h = (h ^ c[k]) * 1099511628211ull;
    }
    return h;
}

static unsigned long long all(BalerOptions *options) {
    unsigned long long h = 0;
    for (int p = 0; p < n_phrases; p++) h += fingerprint(options, phrases[p]) * (p + 1);
    return h;
}

static void *worker(void *arg) {
    int *ok = arg;
    BalerOptions *options = baler_options_new();
    *ok = 1;
    for (int r = 0; r < REPEATS; r++)
        if (all(options) != expected) *ok = 0;
    baler_options_free(options);
    return NULL;
}

int main(int argc, char **argv) {
    BalerTable *t;
    if (argc < 3 || baler_table_open(argv[1], &t) != BALER_STATUS_OK) return 2;
    table = t;
    phrases = argv + 2;
    n_phrases = argc - 2;
    BalerOptions *options = baler_options_new();
    expected = all(options);
    baler_options_free(options);
    pthread_t threads[THREADS];
    int ok[THREADS];
    for (int i = 0; i < THREADS; i++) pthread_create(&threads[i], NULL, worker, &ok[i]);
    int agree = 1;
    for (int i = 0; i < THREADS; i++) {
        pthread_join(threads[i], NULL);
        agree &= ok[i];
    }
    baler_table_close(t);
    printf("%s\n", agree ? "threads agree" : "threads DISAGREE");
    return agree ? 0 : 1;
}
