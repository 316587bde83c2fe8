/* tests/fuzz/fuzz_netlist.c: libFuzzer harness over the whole read-parse-analyse-report path.
 * Any input must end in a status (never a crash, a leak or undefined behaviour); inputs
 * whose sweep or size would make one run slow are parsed but not analysed. */
#include <stdint.h>
#include <stdio.h>

#include "circuit.h"
#include "grid.h"
#include "tbeta.h"

/* Keeps one run fast: analyse small circuits on short grids only. */
#define FUZZ_MAX_UNKNOWNS 400
#define FUZZ_MAX_POINTS 64

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size);

static void write_all(const tb_circuit *ckt, const tb_result *res)
{
    FILE *sink = fopen("/dev/null", "w");
    if (!sink)
        return;
    (void)tb_report_text(ckt, res, sink);
    (void)tb_report_json(ckt, res, sink);
    for (size_t l = 0; l < tb_result_loops(res); l++)
        (void)tb_report_csv(ckt, res, l, sink);
    fclose(sink);
}

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
    tb_diag *diag = tb_diag_new();
    tb_circuit *ckt = NULL;
    tb_result *res = NULL;
    if (!diag)
        return 0;
    if (tb_circuit_parse((const char *)data, size, "fuzz.net", diag, &ckt) == TB_OK &&
        tb_circuit_unknowns(ckt) <= FUZZ_MAX_UNKNOWNS && tb_grid_count(&ckt->ac) <= FUZZ_MAX_POINTS &&
        tb_analyse(ckt, NULL, diag, &res) == TB_OK)
        write_all(ckt, res);
    char buf[256];
    for (size_t i = 0; i < tb_diag_count(diag); i++)
        (void)tb_diag_format(diag, i, buf, sizeof buf);
    tb_result_free(res);
    tb_circuit_free(ckt);
    tb_diag_free(diag);
    return 0;
}
