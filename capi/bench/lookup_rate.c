/* Lookup throughput of the C ABI; see capi/bench/throughput.sh. Usage: lookup_rate TABLE
 * QUERIES [ROUNDS]. Same work as capi/examples/lookup_rate.rs: every query once per round into
 * one reused result, reading every option's target and first score; median ns per lookup. */
#define _POSIX_C_SOURCE 200809L

#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

#include "baler.h"

static double now_ns(void) {
    struct timespec t;
    clock_gettime(CLOCK_MONOTONIC, &t);
    return (double)t.tv_sec * 1e9 + (double)t.tv_nsec;
}

static int cmp(const void *a, const void *b) {
    double x = *(const double *)a, y = *(const double *)b;
    return (x > y) - (x < y);
}

int main(int argc, char **argv) {
    if (argc < 3) {
        fprintf(stderr, "usage: lookup_rate TABLE QUERIES [ROUNDS]\n");
        return 2;
    }
    int rounds = argc > 3 ? atoi(argv[3]) : 7;
    BalerTable *table;
    if (baler_table_open(argv[1], &table) != BALER_STATUS_OK) {
        fprintf(stderr, "lookup_rate: %s\n", baler_last_error());
        return 2;
    }
    FILE *f = fopen(argv[2], "r");
    if (!f) {
        perror(argv[2]);
        return 2;
    }
    size_t n = 0, cap = 1024;
    char **queries = malloc(cap * sizeof *queries);
    size_t *lens = malloc(cap * sizeof *lens);
    char *line = NULL;
    size_t line_cap = 0;
    ssize_t got;
    while ((got = getline(&line, &line_cap, f)) > 0) {
        if (line[got - 1] == '\n') line[--got] = '\0';
        if (got == 0) continue;
        if (n == cap) {
            cap *= 2;
            queries = realloc(queries, cap * sizeof *queries);
            lens = realloc(lens, cap * sizeof *lens);
        }
        queries[n] = strdup(line);
        lens[n++] = (size_t)got;
    }
    free(line);
    fclose(f);

    BalerOptions *options = baler_options_new();
    double *times = malloc((size_t)rounds * sizeof *times);
    unsigned long long check = 0;
    double score_sum = 0;
    for (int r = -1; r < rounds; r++) { /* round -1 warms up */
        unsigned long long bytes = 0;
        double sum = 0;
        double t0 = now_ns();
        for (size_t q = 0; q < n; q++) {
            if (baler_lookup(table, queries[q], lens[q], options) != BALER_STATUS_OK) {
                fprintf(stderr, "lookup_rate: %s\n", baler_last_error());
                return 2;
            }
            size_t k = baler_options_len(options);
            for (size_t i = 0; i < k; i++) {
                size_t len;
                baler_option_target(options, i, &len);
                bytes += len;
                sum += baler_option_scores(options, i)[0];
            }
        }
        double t1 = now_ns();
        if (r < 0) {
            check = bytes;
            score_sum = sum;
        } else {
            times[r] = (t1 - t0) / (double)n;
            if (bytes != check) return 3;
        }
    }
    qsort(times, (size_t)rounds, sizeof *times, cmp);
    printf("c\t%.1f\tns/lookup\t%zu queries\ttarget bytes %llu\tscore sum %.3f\n",
           times[rounds / 2], n, check, score_sum);
    for (size_t q = 0; q < n; q++) free(queries[q]);
    free(queries);
    free(lens);
    free(times);
    baler_options_free(options);
    baler_table_close(table);
    return 0;
}
