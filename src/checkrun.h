/* src/checkrun.h: the regression runner behind 'tbeta check': files, shards, threads, baselines, writers */
#ifndef TB_CHECKRUN_H
#define TB_CHECKRUN_H

#include <stdbool.h>
#include <stddef.h>
#include <stdint.h>
#include <stdio.h>

#include "tbeta.h"

/* Options of one run; tb_check_options_init sets every field. */
typedef struct {
    const char *glob;      /* file-name pattern inside directories (default "*.net") */
    unsigned jobs;         /* threads (default: the online cores, at least 1) */
    unsigned shard_index;  /* this shard, 0 <= shard_index < shard_count */
    unsigned shard_count;  /* 1: no sharding */
    double drift_pct;      /* a figure that moves more than this percent the worse way drifts (default 1) */
    tb_options analysis;   /* tb_analyse options for every netlist */
    const char *include_root; /* .include confined to this folder; NULL: to the folder of the
                               * argument each netlist came from (the library tree) */
    bool include_anywhere; /* no confinement at all (default false) */
    bool compared;         /* set by tb_check_against */
    const char *html_dir;  /* each netlist's review page is written into this folder (created
                            * when missing), or NULL (the default): none */
} tb_check_options;

void tb_check_options_init(tb_check_options *opt);

typedef enum { TB_CHECK_PASS, TB_CHECK_FAIL, TB_CHECK_ERROR } tb_check_status;
/* "pass", "fail", "error": the words of --json files. */
const char *tb_check_status_str(tb_check_status st);

/* The documents of --save and --json (docs/check.md): their format tag, and the version
 * written and read (a reader refuses a later one). */
#define TB_CHECK_FORMAT "tbeta-check"
#define TB_CHECK_FORMAT_VERSION 1

/* One figure of one loop as measured (or absent, with why). */
typedef struct {
    int figure;       /* index into the figure table (src/expect.h) */
    bool present;
    double value;
    char *why;        /* absent: the reason */
} tb_check_figure;

typedef struct {
    char *name;
    tb_check_figure *figures; /* tb_figure_count() of them, in table order */
} tb_check_loop;

/* One evaluated expectation. */
typedef struct {
    char *target;     /* LOOP.FIGURE */
    int line;
    int figure;
    bool pass;
    bool present;
    double value;
    char *bound;      /* "the bound for people" */
    char *measured;   /* the measured value for people */
} tb_check_expect;

/* A figure that moved the worse way against the baseline. */
typedef struct {
    char *target;     /* LOOP.FIGURE */
    char *was;
    char *now;
} tb_check_drift;

/* One netlist of the run. */
typedef struct {
    char *path;           /* as found (argument, or directory + relative path) */
    char *rel;            /* relative to the argument it came from: the shard key */
    tb_check_status status;
    char *errors;         /* ERROR: the diagnostics, formatted (NULL otherwise) */
    char *warnings;       /* formatted warnings, or NULL */
    tb_check_loop *loops;
    size_t loop_count;
    tb_check_expect *expects;
    size_t expect_count;
    tb_check_drift *drifts;
    size_t drift_count;
    bool in_baseline;     /* --against: the baseline has this netlist */
    char *page;           /* the review page written (opt.html_dir), as a link from beside that
                           * folder ("FOLDER/NAME.html"), or NULL */
} tb_check_entry;

typedef struct tb_check_run tb_check_run;

/* A new run over paths[0..count): files are taken as they are, directories
 * searched recursively for names matching opt->glob; sorted by path; only the
 * files of shard opt->shard_index kept. Unreadable arguments become ERROR
 * entries. Errors: TB_ERR_NOMEM, TB_ERR_USAGE. Free with tb_check_free. */
tb_status tb_check_collect(const char *const *paths, size_t count, const tb_check_options *opt,
                           tb_check_run **out);
/* Reads, analyses and evaluates every netlist, opt->jobs at a time; a netlist that cannot
 * be read or analysed becomes an ERROR entry with its diagnostics. Errors: TB_ERR_USAGE,
 * TB_ERR_NOMEM (the run is incomplete then: free it). */
tb_status tb_check_execute(tb_check_run *run);
/* Compares every entry with a saved run (a --save or --json file, checked whole first:
 * src/checkload.c); figures that moved the worse way by more than drift_pct become drifts
 * and fail the entry. Errors: TB_ERR_IO (unreadable, with *why), TB_ERR_INPUT (not a saved
 * run, or one with a wrong type, version or status, or a netlist twice: *why says where),
 * TB_ERR_NOMEM. */
tb_status tb_check_against(tb_check_run *run, const char *path, char *why, size_t why_size);
/* Adds the entries of a --json file written by another shard, checked as above; a netlist
 * already in the run (the same shard's file merged twice) is refused (TB_ERR_INPUT). */
tb_status tb_check_merge(tb_check_run *run, const char *path, char *why, size_t why_size);
/* Tells fn(ctx, done, count) of the netlists finished while tb_check_execute runs; fn may be
 * called from several threads at once (fn NULL: nothing is told). */
void tb_check_set_progress(tb_check_run *run, tb_progress_fn fn, void *ctx);
/* Sorts entries by path (after merging). */
void tb_check_sort(tb_check_run *run);
void tb_check_free(tb_check_run *run);

size_t tb_check_count(const tb_check_run *run);
const tb_check_entry *tb_check_get(const tb_check_run *run, size_t i);

/* Shared by checkrun.c, checkjson.c and checkreport.c: a new empty entry at
 * the end (NULL when out of memory), an entry to fill in, the options, and
 * strings made with tb_malloc. */
tb_check_entry *tb_check_append(tb_check_run *run);
tb_check_entry *tb_check_at(tb_check_run *run, size_t i);
const tb_check_options *tb_check_opts(const tb_check_run *run);
void tb_check_set_compared(tb_check_run *run);
char *tb_check_strdup(const char *s);
char *tb_check_format(const char *fmt, ...) __attribute__((format(printf, 1, 2)));

/* 64-bit FNV-1a of a string: the shard of a file is fnv1a(rel) % shard_count. */
uint64_t tb_check_hash(const char *s);

/* Writers. Text: one line per netlist (more for extra failures), then a summary. */
tb_status tb_check_write_text(const tb_check_run *run, FILE *out);
/* The figures only (--save). */
tb_status tb_check_write_save(const tb_check_run *run, FILE *out);
/* Everything (--json): status, expectations, drifts, figures. */
tb_status tb_check_write_json(const tb_check_run *run, FILE *out);
/* JUnit XML: one testsuite per netlist, one testcase per expectation. */
tb_status tb_check_write_junit(const tb_check_run *run, FILE *out);
/* A self-contained HTML summary page (src/checkhtml.c): counts, then one row per netlist
 * with its status, its failures or errors, and a link to its review page when one was
 * written (tb_check_entry.page). */
tb_status tb_check_write_html(const tb_check_run *run, FILE *out);

/* Any writer of one document to a stream, with its own context. */
typedef tb_status (*tb_file_writer)(const void *ctx, FILE *out);
/* Writes the file at path with writer(ctx, stream), whole or not at all, as tb_checkfile_write
 * below does (the one place that does it). Errors as tb_checkfile_write. */
tb_status tb_file_write(const char *path, tb_file_writer writer, const void *ctx, char *why, size_t why_size);

/* A writer above, as tb_checkfile_write takes it. */
typedef tb_status (*tb_check_writer)(const tb_check_run *run, FILE *out);
/* Writes the file at path with writer, whole or not at all (src/checkfile.c): into a new file
 * beside it, flushed and synced, then renamed over it, so that a reader sees the old file or
 * the new one, never part of one, and a failure leaves the old file as it was. A symbolic
 * link is kept (the file it names is replaced); a path that is not a regular file (a terminal,
 * /dev/null, a pipe) is written directly. Errors: TB_ERR_IO (why says what failed), TB_ERR_NOMEM,
 * TB_ERR_USAGE. */
tb_status tb_checkfile_write(const char *path, const tb_check_run *run, tb_check_writer writer, char *why,
                             size_t why_size);

/* Exit status of the run: 2 when a netlist could not be read or analysed,
 * else 1 when an expectation failed or a figure drifted, else 0. */
int tb_check_exit_code(const tb_check_run *run);

#endif
