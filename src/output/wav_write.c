/* wav_write.c: writes the audio of the WAV export with libsndfile.
 *
 * Invariants: data goes to "<path>.tmp.<pid>-<i>" (ringup/outfile.h: created with
 * O_EXCL; a final path that is a link, a device or a FIFO is refused) in the target folder and is renamed onto path only after
 * sf_close and close succeeded; every failure removes the temporary file. Clipping
 * is switched on, so a value past full scale saturates instead of wrapping around
 * (libsndfile's default for integer PCM wraps). */
#define _POSIX_C_SOURCE 200809L

#include "output/wav_impl.h"

#include "ringup/outfile.h"

#include <errno.h>
#include <fcntl.h>
#include <sndfile.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#define RU_WAV_CHUNK 65536   /* frames per sf_write_double call */

/* sf_open_fd with close_desc false: the descriptor stays ours to close. */
static ru_status write_frames(int fd, const char *path, double rate_hz,
                              ru_wav_format format, const double *y, size_t n,
                              ru_error *err)
{
    SF_INFO info;
    memset(&info, 0, sizeof info);
    info.samplerate = (int)rate_hz;
    info.channels = 1;
    info.format = SF_FORMAT_WAV | (format == RU_WAV_FLOAT ? SF_FORMAT_FLOAT
                                                          : SF_FORMAT_PCM_24);
    if (!sf_format_check(&info))
        return ru_error_set(err, RU_EIO, NULL, 0, 0,
                            "cannot write WAV file %s: format refused by libsndfile", path);
    SNDFILE *sf = sf_open_fd(fd, SFM_WRITE, &info, SF_FALSE);
    if (!sf)
        return ru_error_set(err, RU_EIO, NULL, 0, 0, "cannot write WAV file %s: %s",
                            path, sf_strerror(NULL));
    sf_command(sf, SFC_SET_CLIPPING, NULL, SF_TRUE);
    ru_status st = RU_OK;
    for (size_t i = 0; i < n && st == RU_OK; i += RU_WAV_CHUNK) {
        sf_count_t m = (sf_count_t)(n - i < RU_WAV_CHUNK ? n - i : RU_WAV_CHUNK);
        if (sf_write_double(sf, y + i, m) != m)
            st = ru_error_set(err, RU_EIO, NULL, 0, 0, "cannot write WAV file %s: %s",
                              path, sf_strerror(sf));
    }
    int cl = sf_close(sf);
    if (st == RU_OK && cl != 0)
        st = ru_error_set(err, RU_EIO, NULL, 0, 0, "cannot write WAV file %s: %s", path,
                          sf_error_number(cl));
    return st;
}

ru_status ru_wav_write_file(const char *path, double rate_hz, ru_wav_format format,
                            const double *y, size_t n, ru_error *err)
{
    char *tmp = NULL;
    int fd = -1;
    ru_status st = ru_outfile_tmp(path, &fd, &tmp, err);
    if (st == RU_OK) {
        st = write_frames(fd, path, rate_hz, format, y, n, err);
        if (close(fd) != 0 && st == RU_OK)
            st = ru_error_set(err, RU_EIO, NULL, 0, 0, "cannot write WAV file %s: %s",
                              path, strerror(errno));
        if (st == RU_OK && rename(tmp, path) != 0)
            st = ru_error_set(err, RU_EIO, NULL, 0, 0,
                              "cannot write WAV file %s: rename failed: %s", path,
                              strerror(errno));
        if (st != RU_OK)
            unlink(tmp);
    }
    free(tmp);
    return st;
}
