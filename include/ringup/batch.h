/* ringup/batch.h: many start-up analyses in parallel over the machine's cores.
 *
 * Each item holds its own circuit and request and receives its own report, status
 * and error: nothing is shared between runs but read-only data, so one failing item
 * never stops the others. Threads are created for the call and joined before it
 * returns; the library keeps no pool and no global state. */
#ifndef RINGUP_BATCH_H
#define RINGUP_BATCH_H

#include "ringup/analysis.h"

#ifdef __cplusplus
extern "C" {
#endif

typedef struct ru_batch_item {
    const ru_circuit *circuit; /* in: the variant to run (owned by the caller); NULL:
                                  skipped, status and error left as the caller set
                                  them (a variant that could not be made) */
    ru_run_request request;    /* in: how to run it */
    ru_run_report report;      /* out */
    ru_status status;          /* out: RU_OK, or why this item failed */
    ru_error error;            /* out: the message when status is not RU_OK */
} ru_batch_item;

/* Runs every item; threads <= 0 uses the number of online processors. Returns
 * RU_OK when the batch ran (look at each item's status), RU_ENOMEM when threads
 * could not be started at all (then items run one after another). */
ru_status ru_batch_run(ru_batch_item *items, size_t n, int threads);

/* Number of online processors (at least 1). */
int ru_batch_cpu_count(void);

#ifdef __cplusplus
}
#endif
#endif
