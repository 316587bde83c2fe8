/* tests/fuzz/fuzz_runner.c: libFuzzer harness over the regression runner's saved runs: any byte
 * string, taken as a baseline (--save or --json file) and as a shard's --json file, must end in
 * a status with a message (never a crash, a leak or undefined behaviour), and a run that took it
 * goes through every writer of the runner (text, JUnit, --save, --json).
 *
 * Once, before the first input, the harness checks a small library (TB_FUZZ_LIBRARY, default
 * the fixtures of tests/check seen from build/fuzz) and writes its --json file beside it; each
 * input is then (1) a baseline for that run (--against: drift and the records matched by path
 * and by relative path) and (2) a shard's file merged twice into an empty run (the second
 * merge must be refused). */
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "checkrun.h"

int LLVMFuzzerInitialize(int *argc, char ***argv);
int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size);

#define FUZZ_RUN_FILE "fuzz-runner-run.json"
#define FUZZ_INPUT_FILE "fuzz-runner-input.json"

int LLVMFuzzerInitialize(int *argc, char ***argv)
{
    (void)argc;
    (void)argv;
    const char *lib = getenv("TB_FUZZ_LIBRARY");
    const char *paths[] = {lib ? lib : "../../tests/check"};
    tb_check_options opt;
    tb_check_run *run = NULL;
    char why[256];
    tb_check_options_init(&opt);
    opt.jobs = 1;
    if (tb_check_collect(paths, 1, &opt, &run) != TB_OK || tb_check_execute(run) != TB_OK ||
        tb_check_count(run) == 0 || tb_checkfile_write(FUZZ_RUN_FILE, run, tb_check_write_json, why, sizeof why) != TB_OK)
        abort(); /* the harness needs its library */
    tb_check_free(run);
    return 0;
}

static void write_all(const tb_check_run *run)
{
    FILE *sink = fopen("/dev/null", "w");
    if (!sink)
        return;
    (void)tb_check_write_text(run, sink);
    (void)tb_check_write_junit(run, sink);
    (void)tb_check_write_save(run, sink);
    (void)tb_check_write_json(run, sink);
    fclose(sink);
}

/* A refusal says why (the command line escapes the message's odd bytes when it prints it). */
static void check_why(tb_status st, const char *why)
{
    if (st != TB_OK && why[0] == '\0')
        abort();
}

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
    FILE *f = fopen(FUZZ_INPUT_FILE, "wb");
    if (!f)
        return 0;
    size_t wrote = fwrite(data, 1, size, f);
    if (fclose(f) != 0 || wrote != size)
        return 0;
    tb_check_options opt;
    tb_check_options_init(&opt);
    opt.jobs = 1;
    char why[512];

    /* (1) the input as a baseline of the library's run */
    tb_check_run *run = NULL;
    if (tb_check_collect(NULL, 0, &opt, &run) == TB_OK) {
        why[0] = '\0';
        if (tb_check_merge(run, FUZZ_RUN_FILE, why, sizeof why) != TB_OK)
            abort(); /* the harness's own file always merges */
        tb_check_sort(run);
        why[0] = '\0';
        tb_status st = tb_check_against(run, FUZZ_INPUT_FILE, why, sizeof why);
        check_why(st, why);
        if (st == TB_OK) {
            write_all(run);
            (void)tb_check_exit_code(run);
        }
    }
    tb_check_free(run);

    /* (2) the input as a shard's file, merged twice */
    run = NULL;
    if (tb_check_collect(NULL, 0, &opt, &run) == TB_OK) {
        why[0] = '\0';
        tb_status st = tb_check_merge(run, FUZZ_INPUT_FILE, why, sizeof why);
        check_why(st, why);
        if (st == TB_OK) {
            size_t n = tb_check_count(run);
            why[0] = '\0';
            st = tb_check_merge(run, FUZZ_INPUT_FILE, why, sizeof why);
            if (n > 0 && st == TB_OK)
                abort(); /* the same shard's file twice is refused */
            check_why(st, why);
            tb_check_sort(run);
            write_all(run);
            (void)tb_check_exit_code(run);
        }
    }
    tb_check_free(run);
    return 0;
}
