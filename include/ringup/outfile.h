/* outfile.h: output files written whole or not at all (the output layer).
 *
 * A file is written under a temporary name next to its final one,
 * "PATH.tmp.PID-I", created new (O_EXCL, mode 0666 under the umask), and renamed
 * onto PATH only when every byte was written, flushed, synced and closed; every
 * other end removes the temporary file. A final path that exists and is not a
 * regular file (a symbolic link, a device such as /dev/null, a FIFO, a folder) is
 * refused, never replaced and never written through. Failures are RU_EIO with the
 * path and the system's reason. */
#ifndef RINGUP_OUTFILE_H
#define RINGUP_OUTFILE_H

#include "ringup/status.h"

#include <stdio.h>

#ifdef __cplusplus
extern "C" {
#endif

/* RU_OK when path names nothing yet or a regular file (which a rename may
 * replace); RU_EIO, saying what it is, otherwise. Call it before work whose
 * result goes there, so a bad name is refused before the work starts. */
ru_status ru_outfile_check(const char *path, ru_error *err);

/* ru_outfile_check, and a temporary file can be made in path's folder (made and
 * removed at once): a read-only or missing folder is refused before the work. */
ru_status ru_outfile_probe(const char *path, ru_error *err);

/* Creates "PATH.tmp.PID-I" for path (after ru_outfile_check) and returns its
 * open descriptor and malloc'd name (the caller frees it). */
ru_status ru_outfile_tmp(const char *path, int *fd, char **tmp, ru_error *err);

typedef struct ru_outfile ru_outfile;

/* Constructor: a stdio stream on a new temporary file for path. */
ru_status ru_outfile_open(const char *path, ru_outfile **out, ru_error *err);

/* The stream to write to (fully buffered). */
FILE *ru_outfile_stream(ru_outfile *f);

/* Destructor that keeps the file: flushes, syncs and closes the stream, checks
 * that no write failed and renames the temporary file onto the final path; on
 * any failure removes it and returns RU_EIO. NULL is harmless (RU_OK). */
ru_status ru_outfile_commit(ru_outfile *f, ru_error *err);

/* Destructor that keeps nothing: closes the stream and removes the temporary
 * file. NULL is harmless. */
void ru_outfile_discard(ru_outfile *f);

#ifdef __cplusplus
}
#endif

#endif
