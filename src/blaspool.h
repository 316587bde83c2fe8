/* src/blaspool.h: parks the BLAS library's idle thread pool at program start */
#ifndef TB_BLASPOOL_H
#define TB_BLASPOOL_H

/* Keeps OpenBLAS to one thread (the calling one) and shuts its thread pool down, if the BLAS
 * linked is OpenBLAS. Nothing with another BLAS. Call before any thread of
 * the program's own is started. */
void tb_blaspool_park(void);

#endif
