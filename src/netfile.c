/* src/netfile.c: reading netlist files safely: regular files only, a size limit, binary and foreign text refused */
#include "netfile.h"

#include <errno.h>
#include <fcntl.h>
#include <stdint.h>
#include <stdio.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

#include "alloc.h"
#include "lex.h"

/* "a FIFO" and the like for a file that is not regular. */
static const char *kind_of(mode_t mode)
{
    if (S_ISDIR(mode))
        return "a directory";
    if (S_ISCHR(mode))
        return "a character device";
    if (S_ISBLK(mode))
        return "a block device";
    if (S_ISFIFO(mode))
        return "a FIFO";
    if (S_ISSOCK(mode))
        return "a socket";
    return "not a file";
}

static tb_status system_error(tb_file_why *why, int err)
{
    *why = (tb_file_why){.problem = TB_FILE_SYSTEM, .err = err ? err : EIO};
    return TB_ERR_IO;
}

tb_status tb_netfile_open(const char *path, bool no_follow, tb_netfile *f, tb_file_why *why)
{
    /* O_NONBLOCK: opening a FIFO (or a device) for reading must not wait for a writer */
    int flags = O_RDONLY | O_NONBLOCK | O_NOCTTY | O_CLOEXEC | (no_follow ? O_NOFOLLOW : 0);
    int fd = open(path, flags);
    if (fd < 0)
        return system_error(why, errno);
    struct stat st;
    if (fstat(fd, &st) != 0) {
        int err = errno;
        close(fd);
        return system_error(why, err);
    }
    if (!S_ISREG(st.st_mode)) {
        close(fd);
        *why = (tb_file_why){.problem = TB_FILE_NOT_REGULAR, .kind = kind_of(st.st_mode)};
        return TB_ERR_IO;
    }
    *f = (tb_netfile){.fd = fd, .size = (long long)st.st_size};
    snprintf(f->id, sizeof f->id, "%llx:%llx", (unsigned long long)st.st_dev, (unsigned long long)st.st_ino);
    return TB_OK;
}

void tb_netfile_close(tb_netfile *f)
{
    if (f->fd >= 0)
        close(f->fd);
    f->fd = -1;
}

/* The line and column of byte at of text: line ends are LF, CRLF or CR, as the lexer reads them. */
static void place_of(const char *text, size_t at, int *line, int *col)
{
    size_t start = 0;
    *line = 1;
    for (size_t i = 0; i < at; i++) {
        if (text[i] == '\n' || (text[i] == '\r' && text[i + 1] != '\n')) {
            *line += *line < INT32_MAX;
            start = i + 1;
        }
    }
    *col = at - start < INT32_MAX ? (int)(at - start) + 1 : INT32_MAX;
}

/* Reads fd to its end into buf, stopping past limit bytes. */
static tb_status read_all(int fd, size_t limit, char **buf, size_t *cap, size_t *n, int *err)
{
    for (;;) {
        if (*n == *cap && tb_grow(buf, cap, *n + 1, 1, limit + 1)) /* n <= limit here */
            return TB_ERR_NOMEM;
        ssize_t got = read(fd, *buf + *n, *cap - *n);
        if (got < 0 && errno == EINTR)
            continue;
        if (got < 0) {
            *err = errno;
            return TB_ERR_IO;
        }
        if (got == 0)
            return TB_OK;
        *n += (size_t)got;
        if (*n > limit)
            return TB_OK;
    }
}

tb_status tb_netfile_load(tb_netfile *f, size_t limit, char **text, size_t *len, tb_file_why *why)
{
    if (limit >= SIZE_MAX / 2)
        limit = SIZE_MAX / 2 - 1;
    if (f->size > 0 && (unsigned long long)f->size > limit) {
        *why = (tb_file_why){.problem = TB_FILE_TOO_LARGE, .limit = limit};
        return TB_ERR_INPUT;
    }
    /* a regular file opened with O_NONBLOCK reads as if blocking; the size is a first
     * guess only (files under /proc say 0) */
    size_t cap = f->size > 0 ? (size_t)f->size + 1 : 4096;
    char *buf = tb_malloc(cap, 1);
    size_t n = 0;
    int err = 0;
    tb_status st = buf ? read_all(f->fd, limit, &buf, &cap, &n, &err) : TB_ERR_NOMEM;
    if (st == TB_OK && n > limit) {
        *why = (tb_file_why){.problem = TB_FILE_TOO_LARGE, .limit = limit};
        st = TB_ERR_INPUT;
    } else if (st == TB_OK && memchr(buf, '\0', n)) {
        *why = (tb_file_why){.problem = TB_FILE_BINARY};
        place_of(buf, (size_t)((const char *)memchr(buf, '\0', n) - buf), &why->line, &why->col);
        st = TB_ERR_INPUT;
    } else if (st == TB_ERR_IO) {
        system_error(why, err);
    }
    if (st != TB_OK) {
        tb_free(buf);
        return st;
    }
    *text = buf;
    *len = n;
    return TB_OK;
}

/* "1 GiB", "512 KiB" or "1000 bytes". */
static void put_size(size_t n, char *buf, size_t size)
{
    static const char *const unit[] = {"bytes", "KiB", "MiB", "GiB", "TiB"};
    int u = 0;
    while (u < 4 && n >= 1024 && n % 1024 == 0) {
        n /= 1024;
        u++;
    }
    snprintf(buf, size, "%zu %s", n, unit[u]);
}

const char *tb_netfile_why_text(const tb_file_why *why, char *buf, size_t size)
{
    char amount[32];
    switch (why->problem) {
    case TB_FILE_SYSTEM:
        if (strerror_r(why->err, buf, size) != 0)
            snprintf(buf, size, "error %d", why->err);
        break;
    case TB_FILE_NOT_REGULAR:
        snprintf(buf, size, "not a regular file (%s)", why->kind);
        break;
    case TB_FILE_TOO_LARGE:
        put_size(why->limit, amount, sizeof amount);
        snprintf(buf, size, "a netlist and its includes may hold at most %s in all", amount);
        break;
    case TB_FILE_BINARY:
        snprintf(buf, size, "it holds binary data (a NUL byte on line %d)", why->line);
        break;
    default:
        snprintf(buf, size, "read");
        break;
    }
    return buf;
}

/* ---- the shape of cards ------------------------------------------------- */

/* The fewest tokens a card that starts with this element letter has
 * (rcard: name node node value ...), 0 for a letter that starts no element. */
static size_t fewest_tokens(char letter)
{
    switch (tb_lex_lower(letter)) {
    case 'r':
    case 'c':
    case 'l':
    case 'k':
    case 'q': /* Q c b e KEY=value: devices at a bias point (device.c) */
    case 'm':
    case 'd': /* D S W B J: refused by name, with what to write instead (device.c) */
    case 's':
    case 'w':
    case 'b':
    case 'j':
        return 4;
    case 'v':
    case 'i':
        return 3;
    case 'e':
    case 'g':
        return 6;
    case 'f':
    case 'h':
        return 5;
    case 'x':
        return 2;
    default:
        return 0;
    }
}

/* A directive word: '.' and one or more ASCII letters. */
static bool directive_word(const tb_token *t)
{
    if (t->len < 2 || t->ptr[0] != '.')
        return false;
    for (size_t i = 1; i < t->len; i++) {
        char c = tb_lex_lower(t->ptr[i]);
        if (c < 'a' || c > 'z')
            return false;
    }
    return true;
}

int tb_netfile_foreign_line(const char *text, size_t len)
{
    tb_lexer lx;
    size_t skip = len >= 3 && memcmp(text, "\xEF\xBB\xBF", 3) == 0 ? 3 : 0;
    tb_lex_init_at(&lx, text, len, skip, 1);
    for (int card = 0; card < TB_NETFILE_SHAPE_CARDS; card++) {
        tb_token first = tb_lex_next(&lx);
        if (first.kind == TB_TOK_EOF)
            return 0;
        size_t tokens = 1;
        bool clean = first.kind == TB_TOK_WORD;
        tb_token tok = first;
        while (tok.kind != TB_TOK_EOC && tok.kind != TB_TOK_EOF) {
            tok = tb_lex_next(&lx);
            tokens += tok.kind != TB_TOK_EOC && tok.kind != TB_TOK_EOF;
            clean = clean && tok.kind != TB_TOK_BAD && tok.kind != TB_TOK_PLUS;
        }
        bool shaped = clean && (directive_word(&first) ||
                                (fewest_tokens(first.ptr[0]) && tokens >= fewest_tokens(first.ptr[0])));
        if (!shaped)
            return first.line;
        if (tok.kind == TB_TOK_EOF || tb_lex_is(&first, ".end")) /* nothing after .end is read */
            return 0;
    }
    return 0;
}
