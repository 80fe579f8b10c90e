/* batch.c: parallel start-up analyses (see ringup/batch.h).
 *
 * Workers take the next item index from a counter guarded by a mutex local to the
 * call; each item is analysed by ru_analysis_run, which touches no shared mutable
 * state (FFTW's planner has its own lock in harmonics.c). */
#include "ringup/batch.h"

#include <pthread.h>
#include <stdlib.h>
#include <unistd.h>

typedef struct batch_ctx {
    ru_batch_item *items;
    size_t n;
    size_t next;           /* next item to take */
    pthread_mutex_t lock;  /* guards next */
} batch_ctx;

static void run_item(ru_batch_item *it)
{
    if (!it->circuit)
        return; /* could not be made: its status and error stand */
    ru_error_clear(&it->error);
    it->status = ru_analysis_run(it->circuit, &it->request, &it->report, &it->error);
    if (it->status != RU_OK && it->error.code == RU_OK)
        it->error.code = it->status;
}

static void *worker(void *arg)
{
    batch_ctx *b = arg;
    for (;;) {
        pthread_mutex_lock(&b->lock);
        size_t i = b->next++;
        pthread_mutex_unlock(&b->lock);
        if (i >= b->n)
            return NULL;
        run_item(&b->items[i]);
    }
}

int ru_batch_cpu_count(void)
{
    long n = sysconf(_SC_NPROCESSORS_ONLN);
    return n > 0 ? (int)n : 1;
}

ru_status ru_batch_run(ru_batch_item *items, size_t n, int threads)
{
    if (threads <= 0)
        threads = ru_batch_cpu_count();
    if ((size_t)threads > n)
        threads = (int)n;
    batch_ctx b = {.items = items, .n = n, .next = 0};
    pthread_t *tid = threads > 1 ? malloc((size_t)threads * sizeof *tid) : NULL;
    if (!tid || pthread_mutex_init(&b.lock, NULL) != 0) {
        free(tid);
        for (size_t i = 0; i < n; i++)
            run_item(&items[i]);
        return threads > 1 ? RU_ENOMEM : RU_OK;
    }
    int started = 0;
    for (int t = 0; t < threads; t++)
        if (pthread_create(&tid[t], NULL, worker, &b) == 0)
            started++;
        else
            break;
    if (started == 0)
        worker(&b); /* no thread could start: do it here */
    for (int t = 0; t < started; t++)
        pthread_join(tid[t], NULL);
    pthread_mutex_destroy(&b.lock);
    free(tid);
    return RU_OK;
}
