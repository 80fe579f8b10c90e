/* outfile.c: output files written whole or not at all (ringup/outfile.h): the
 * check of a final path, temporary names next to it, and a stream that is renamed
 * into place only when complete. Every writer of the output layer (CSV, WAV,
 * figures, reports) and the CLI's own small files go through here. */
#define _POSIX_C_SOURCE 200809L

#include "ringup/outfile.h"

#include <errno.h>
#include <fcntl.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

#define OUTFILE_TRIES 100 /* temporary names tried before giving up */

struct ru_outfile {
    FILE *fp;
    char *path; /* the final name */
    char *tmp;  /* the temporary name */
};

static ru_status fail_errno(ru_error *err, int e, const char *what, const char *path)
{
    return ru_error_set(err, RU_EIO, NULL, 0, 0, "cannot %s '%s': %s", what, path,
                        strerror(e));
}

static const char *kind_of(mode_t m)
{
    if (S_ISLNK(m))
        return "a symbolic link";
    if (S_ISCHR(m))
        return "a character device";
    if (S_ISBLK(m))
        return "a block device";
    if (S_ISFIFO(m))
        return "a pipe (FIFO)";
    if (S_ISDIR(m))
        return "a folder";
    if (S_ISSOCK(m))
        return "a socket";
    return "not a regular file";
}

ru_status ru_outfile_check(const char *path, ru_error *err)
{
    if (!path || !path[0])
        return ru_error_set(err, RU_EIO, NULL, 0, 0, "an output file needs a name");
    struct stat sb;
    if (lstat(path, &sb) != 0)
        return errno == ENOENT ? RU_OK : fail_errno(err, errno, "write", path);
    if (S_ISREG(sb.st_mode))
        return RU_OK;
    return ru_error_set(err, RU_EIO, NULL, 0, 0,
                        "cannot write '%s': it is %s; ringup writes only new or regular "
                        "files (remove it or choose another name)",
                        path, kind_of(sb.st_mode));
}

ru_status ru_outfile_tmp(const char *path, int *fd, char **tmp, ru_error *err)
{
    *fd = -1;
    *tmp = NULL;
    ru_status st = ru_outfile_check(path, err);
    if (st != RU_OK)
        return st;
    size_t len = strlen(path) + 48;
    char *name = malloc(len);
    if (!name)
        return ru_error_set(err, RU_ENOMEM, NULL, 0, 0, "out of memory");
    int e = 0;
    for (int i = 0; i < OUTFILE_TRIES && *fd < 0; i++) {
        snprintf(name, len, "%s.tmp.%ld-%d", path, (long)getpid(), i);
        *fd = open(name, O_WRONLY | O_CREAT | O_EXCL | O_CLOEXEC, 0666);
        e = errno;
        if (*fd < 0 && e != EEXIST)
            break;
    }
    if (*fd < 0) {
        free(name);
        return fail_errno(err, e, "create a file next to", path);
    }
    *tmp = name;
    return RU_OK;
}

ru_status ru_outfile_probe(const char *path, ru_error *err)
{
    int fd;
    char *tmp;
    ru_status st = ru_outfile_tmp(path, &fd, &tmp, err);
    if (st == RU_OK) {
        close(fd);
        unlink(tmp);
        free(tmp);
    }
    return st;
}

ru_status ru_outfile_open(const char *path, ru_outfile **out, ru_error *err)
{
    *out = NULL;
    ru_outfile *f = calloc(1, sizeof *f);
    if (!f || !(f->path = strdup(path))) {
        free(f);
        return ru_error_set(err, RU_ENOMEM, NULL, 0, 0, "out of memory");
    }
    int fd;
    ru_status st = ru_outfile_tmp(path, &fd, &f->tmp, err);
    if (st == RU_OK && !(f->fp = fdopen(fd, "w"))) {
        st = fail_errno(err, errno, "open a stream for", path);
        close(fd);
    }
    if (st != RU_OK) {
        ru_outfile_discard(f);
        return st;
    }
    *out = f;
    return RU_OK;
}

FILE *ru_outfile_stream(ru_outfile *f) { return f ? f->fp : NULL; }

static void destroy(ru_outfile *f)
{
    if (f->tmp)
        unlink(f->tmp);
    free(f->tmp);
    free(f->path);
    free(f);
}

ru_status ru_outfile_commit(ru_outfile *f, ru_error *err)
{
    if (!f)
        return RU_OK;
    ru_status st = RU_OK;
    if (fflush(f->fp) != 0 || ferror(f->fp))
        st = fail_errno(err, errno ? errno : EIO, "write", f->path);
    else if (fsync(fileno(f->fp)) != 0)
        st = fail_errno(err, errno, "sync", f->path);
    if (fclose(f->fp) != 0 && st == RU_OK)
        st = fail_errno(err, errno, "close", f->path);
    f->fp = NULL;
    if (st == RU_OK && (st = ru_outfile_check(f->path, err)) == RU_OK) {
        if (rename(f->tmp, f->path) != 0)
            st = fail_errno(err, errno, "rename the finished file onto", f->path);
        else
            f->tmp[0] = '\0'; /* renamed: nothing left to remove */
    }
    if (f->tmp && !f->tmp[0]) {
        free(f->tmp);
        f->tmp = NULL;
    }
    destroy(f);
    return st;
}

void ru_outfile_discard(ru_outfile *f)
{
    if (!f)
        return;
    if (f->fp)
        fclose(f->fp);
    destroy(f);
}
