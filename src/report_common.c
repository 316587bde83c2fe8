/* src/report_common.c: words shared by the text and JSON writers */
#include "report.h"

#include <stdio.h>

const char *const tb_report_caution =
    "tbeta is a small-signal, linear analysis of the netlist as written: its figures do not "
    "replace full simulation, bench measurement or design review. Anyone working on "
    "mains-powered or high-voltage circuits follows local codes and licensed practice.";

const char *tb_report_grid_word(tb_grid_kind kind)
{
    return kind == TB_GRID_DEC ? "dec" : kind == TB_GRID_OCT ? "oct" : "lin";
}

const char *tb_report_output(const tb_io_spec *io, char *buf, size_t size)
{
    if (io->out_kind == TB_OUT_I)
        snprintf(buf, size, "i(%s)", io->out_a);
    else if (io->out_b)
        snprintf(buf, size, "v(%s,%s)", io->out_a, io->out_b);
    else
        snprintf(buf, size, "v(%s)", io->out_a);
    return buf;
}
