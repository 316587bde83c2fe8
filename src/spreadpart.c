/* src/spreadpart.c: the spread part of a report: its lifetime */
#include "spreadpart.h"

#include "alloc.h"

tb_spread_part *tb_spread_part_new(void)
{
    return tb_calloc(1, sizeof(tb_spread_part));
}

void tb_spread_part_free(tb_spread_part *part)
{
    if (!part)
        return;
    tb_spreadset_free(part->scan);
    tb_spreadset_free(part->corners);
    tb_spreadset_free(part->samples);
    tb_free(part->at_hz);
    tb_free(part->at);
    tb_free(part);
}
