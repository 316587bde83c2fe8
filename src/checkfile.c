/* src/checkfile.c: output files (the runner's --save, --json, --junit; every --output, --html and
 * picture) written whole or not at all: a temporary file in the same folder, flushed and synced,
 * then renamed over the old one */
#define _XOPEN_SOURCE 700 /* realpath */
#include <errno.h>
#include <fcntl.h>
#include <limits.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

#include "alloc.h"
#include "checkrun.h"

/* Names tried for the temporary file before giving up (each is created exclusively). */
#define TEMP_TRIES 100

/* "cannot write 'PATH': WHAT: ERROR" into why; TB_ERR_IO. */
static tb_status failed(char *why, size_t why_size, const char *path, const char *what, int err)
{
    snprintf(why, why_size, "cannot write '%s': %s%s%s", path, what, err ? ": " : "", err ? strerror(err) : "");
    return TB_ERR_IO;
}

/* Says that the file the run replaces is left as it was. */
static void unchanged(char *why, size_t why_size)
{
    size_t used = strlen(why);
    snprintf(why + used, why_size - used, " (the previous file is left as it was)");
}

/* A path that exists and is not a regular file (a terminal, /dev/null, a pipe): nothing
 * to replace, written as it is. */
static tb_status write_direct(const char *path, tb_file_writer writer, const void *ctx, char *why,
                              size_t why_size)
{
    FILE *f = fopen(path, "w");
    if (!f)
        return failed(why, why_size, path, "cannot open it", errno);
    tb_status st = writer(ctx, f);
    int err = st == TB_OK && fflush(f) != 0 ? errno : 0;
    if (fclose(f) != 0 && st == TB_OK)
        return failed(why, why_size, path, "writing it failed", errno);
    if (st == TB_ERR_IO || err)
        return failed(why, why_size, path, "writing it failed", err);
    return st;
}

/* Creates "DIR/.NAME.PID-K.tmp" beside target, exclusively, mode 0666 less the umask (or
 * the mode of the file it replaces); *tmp is the name made (tb_free), *out the stream. */
static tb_status open_temp(const char *target, const struct stat *old, char **tmp, FILE **out, char *why,
                           size_t why_size)
{
    const char *slash = strrchr(target, '/');
    int dir_len = slash ? (int)(slash - target + 1) : 0;
    const char *name = slash ? slash + 1 : target;
    for (int k = 0; k < TEMP_TRIES; k++) {
        /* the name cut to 200 bytes keeps the temporary one within the usual 255; with the pid
         * and k it takes at most 240 bytes beyond the folder */
        size_t size = (size_t)dir_len + 240;
        char *path = tb_malloc(size, 1);
        if (!path)
            return TB_ERR_NOMEM;
        snprintf(path, size, "%.*s.%.200s.%ld-%d.tmp", dir_len, target, name, (long)getpid(), k);
        int fd = open(path, O_WRONLY | O_CREAT | O_EXCL | O_CLOEXEC, 0666);
        if (fd < 0) {
            int err = errno;
            tb_free(path);
            if (err == EEXIST)
                continue;
            return failed(why, why_size, target, "cannot create a file beside it", err);
        }
        if (old)
            (void)fchmod(fd, old->st_mode & 07777); /* keep the old file's permissions */
        FILE *f = fdopen(fd, "w");
        if (!f) {
            int err = errno;
            close(fd);
            unlink(path);
            tb_free(path);
            return err == ENOMEM ? TB_ERR_NOMEM : failed(why, why_size, target, "cannot open a stream", err);
        }
        *tmp = path;
        *out = f;
        return TB_OK;
    }
    return failed(why, why_size, target, "every temporary name beside it is taken", 0);
}

/* Flushes, syncs and closes f (always closed); TB_ERR_IO with why when any step fails. */
static tb_status finish(FILE *f, const char *target, char *why, size_t why_size)
{
    int err = 0;
    if (fflush(f) != 0 || ferror(f))
        err = errno ? errno : EIO;
    else if (fsync(fileno(f)) != 0 && errno != EINVAL) /* EINVAL: a file system that cannot sync */
        err = errno;
    if (fclose(f) != 0 && !err)
        err = errno;
    return err ? failed(why, why_size, target, "a write failed", err) : TB_OK;
}

/* After the rename: the folder's entry is made durable too (best effort: the file is whole
 * either way). */
static void sync_folder(const char *target)
{
    const char *slash = strrchr(target, '/');
    char dir[PATH_MAX];
    if (!slash)
        snprintf(dir, sizeof dir, ".");
    else
        snprintf(dir, sizeof dir, "%.*s", (int)(slash == target ? 1 : slash - target), target);
    int fd = open(dir, O_RDONLY | O_DIRECTORY | O_CLOEXEC);
    if (fd >= 0) {
        (void)fsync(fd);
        close(fd);
    }
}

tb_status tb_file_write(const char *path, tb_file_writer writer, const void *ctx, char *why, size_t why_size)
{
    if (!path || !writer || !why || why_size == 0)
        return TB_ERR_USAGE;
    struct stat old;
    bool exists = stat(path, &old) == 0;
    if (exists && !S_ISREG(old.st_mode))
        return write_direct(path, writer, ctx, why, why_size);
    /* a symbolic link to a file: replace the file it names, keep the link */
    char resolved[PATH_MAX];
    struct stat link;
    const char *target = path;
    if (exists && lstat(path, &link) == 0 && S_ISLNK(link.st_mode) && realpath(path, resolved))
        target = resolved;
    char *tmp = NULL;
    FILE *f = NULL;
    tb_status st = open_temp(target, exists ? &old : NULL, &tmp, &f, why, why_size);
    if (st == TB_OK) {
        st = writer(ctx, f);
        tb_status closed = finish(f, target, why, why_size);
        if (st == TB_ERR_IO || (st == TB_OK && closed != TB_OK))
            st = closed != TB_OK ? closed : failed(why, why_size, target, "a write failed", 0);
    }
    if (st == TB_OK && rename(tmp, target) != 0)
        st = failed(why, why_size, target, "cannot replace it", errno);
    if (st != TB_OK && tmp)
        unlink(tmp);
    if (st == TB_ERR_IO && exists)
        unchanged(why, why_size);
    if (st == TB_OK)
        sync_folder(target);
    if (st == TB_ERR_NOMEM)
        snprintf(why, why_size, "out of memory");
    tb_free(tmp);
    return st;
}

/* A runner writer called through tb_file_write's context. */
typedef struct {
    const tb_check_run *run;
    tb_check_writer writer;
} run_writer;

static tb_status call_run_writer(const void *ctx, FILE *out)
{
    const run_writer *rw = ctx;
    return rw->writer(rw->run, out);
}

tb_status tb_checkfile_write(const char *path, const tb_check_run *run, tb_check_writer writer, char *why,
                             size_t why_size)
{
    if (!run || !writer)
        return TB_ERR_USAGE;
    run_writer rw = {run, writer};
    return tb_file_write(path, call_run_writer, &rw, why, why_size);
}
