/* ringup/wavefile.h: the CSV waveform writer, a sink for ru_transient_run.
 *
 * Writes DIR/wave.csv: a header `time_s` then one column per free or driven node
 * voltage (named by the node), per inductor current (`i(L1)`) and per crystal's
 * main motional-arm current (`i(X1)`), one row per
 * sample, streamed to disk. The file is written as a temporary name in the same
 * folder and renamed into place by ru_csv_close(..., keep = 1), so a failed run
 * never leaves a half file under the final name. */
#ifndef RINGUP_WAVEFILE_H
#define RINGUP_WAVEFILE_H

#include "ringup/status.h"
#include "ringup/system.h"

#ifdef __cplusplus
extern "C" {
#endif

typedef struct ru_csv ru_csv;

/* Constructor: opens the temporary file next to path. */
ru_status ru_csv_open(const ru_system *s, const char *path, ru_csv **out, ru_error *err);

/* ru_sample_fn-compatible: writes one row. user is the ru_csv. */
ru_status ru_csv_sample(void *user, double t_s, const double *x, size_t n);

/* Constructor of a plain table (as envelope.csv): a header of the given column
 * names, then rows of numbers written by ru_csv_row (the first column with the
 * time's digits). Closed with ru_csv_close like a waveform. */
ru_status ru_csv_open_table(const char *path, const char *const *cols, size_t ncols,
                            ru_csv **out, ru_error *err);
ru_status ru_csv_row(ru_csv *w, const double *v, size_t n);

/* With dc = 1 the driven nodes are written at their sources' final values, not at
 * the row's time: for one period of a periodic steady state (steady.csv), whose
 * time starts at 0 but whose sources are long settled. */
void ru_csv_set_dc(ru_csv *w, int dc);

/* Destructor: flushes and, when keep is 1 and all writes succeeded, renames the
 * temporary file to the final name; otherwise removes it (keep = 2 keeps a partial
 * file under the final name, for a run that failed numerically: its rows are
 * valid up to the time reached). NULL is harmless. */
ru_status ru_csv_close(ru_csv *w, int keep, ru_error *err);

#ifdef __cplusplus
}
#endif
#endif
