/* src/blaspool.h: parks the BLAS library's idle thread pool at program start */
#ifndef TB_BLASPOOL_H
#define TB_BLASPOOL_H

/* Shuts down OpenBLAS's thread pool if the BLAS linked is OpenBLAS; the library starts it
 * again at its first threaded call. Nothing with another BLAS. Call before any thread of
 * the program's own is started. */
void tb_blaspool_park(void);

#endif
