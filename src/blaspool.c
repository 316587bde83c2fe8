/* src/blaspool.c: parks the BLAS library's idle thread pool at program start */
#include "blaspool.h"

/* OpenBLAS (Debian's default BLAS and LAPACK provider) starts one thread per core when it is
 * loaded, and each idle thread spins on sched_yield for about 2^28 cycles before it sleeps:
 * about 0.1 s of CPU at every start of tbeta on a two-core machine, taken from the threads of
 * a --jobs sweep, which does not call BLAS at all. blas_thread_shutdown_ is the call OpenBLAS
 * makes itself after a fork; its next threaded BLAS call starts the pool again. Other BLAS
 * builds do not define the symbol: the weak reference is then null and nothing is done.
 * And OpenBLAS is kept to the calling thread: tbeta's own threads (--jobs) already share the
 * work, and the pool, once started again by a threaded call (a Krylov search's products at
 * 10^3 unknowns and up), spun on sched_yield between every netlist of a `tbeta check`: 14 s of
 * system time in a 17 s library run, and two threads slower than one. */
extern void blas_thread_shutdown_(void) __attribute__((weak));
extern void openblas_set_num_threads(int threads) __attribute__((weak));

void tb_blaspool_park(void)
{
    if (openblas_set_num_threads)
        openblas_set_num_threads(1);
    if (blas_thread_shutdown_)
        blas_thread_shutdown_();
}
