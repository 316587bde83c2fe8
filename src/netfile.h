/* src/netfile.h: reading netlist files safely: regular files only, a size limit, binary and foreign text refused */
#ifndef TB_NETFILE_H
#define TB_NETFILE_H

#include <stdbool.h>
#include <stddef.h>

#include "tbeta.h"

/* Why a file was not read. */
typedef enum {
    TB_FILE_OK = 0,
    TB_FILE_SYSTEM,      /* the system refused: err is the errno */
    TB_FILE_NOT_REGULAR, /* a directory, device, FIFO or socket: kind says which */
    TB_FILE_TOO_LARGE,   /* more bytes than allowed: limit */
    TB_FILE_BINARY       /* it holds a NUL byte: line is where */
} tb_file_problem;

typedef struct {
    tb_file_problem problem;
    int err;          /* TB_FILE_SYSTEM */
    const char *kind; /* TB_FILE_NOT_REGULAR: "a FIFO" and the like, a static string */
    size_t limit;     /* TB_FILE_TOO_LARGE: the bytes that were allowed */
    int line;         /* TB_FILE_BINARY: the line and column of the first NUL byte */
    int col;
} tb_file_why;

/* An open netlist file: a regular file, and its identity ("DEV:INO" in hex: the
 * same whatever path names the file). */
typedef struct {
    int fd;
    long long size; /* as the system says; may be 0 for files that are made when read */
    char id[48];
} tb_netfile;

/* Opens the regular file at path for reading; a final symbolic link is not
 * followed when no_follow (the path was resolved already). Never blocks: a FIFO
 * with no writer is refused, not waited for. TB_OK (close it with
 * tb_netfile_close), or TB_ERR_IO with *why (a system error, not a regular file). */
tb_status tb_netfile_open(const char *path, bool no_follow, tb_netfile *f, tb_file_why *why);
/* Reads the open file whole into *text (tb_malloc'd, owned by the caller, not
 * NUL-terminated) of *len bytes, when it holds at most limit bytes (a file that
 * grows while read is refused at limit + 1) and no NUL byte. TB_OK; TB_ERR_INPUT
 * (too large, binary) or TB_ERR_IO (a read error) with *why; TB_ERR_NOMEM. The
 * file stays open. */
tb_status tb_netfile_load(tb_netfile *f, size_t limit, char **text, size_t *len, tb_file_why *why);
/* Closes the file (again is fine). */
void tb_netfile_close(tb_netfile *f);

/* The reason in words, in buf (returned): "No such file or directory", "not a
 * regular file (a FIFO)", "a netlist and its includes may hold at most 1 GiB in
 * all", "it holds binary data (a NUL byte on line 3)". */
const char *tb_netfile_why_text(const tb_file_why *why, char *buf, size_t size);

/* Whether the text of an included file reads as netlist cards: each of its
 * first TB_NETFILE_SHAPE_CARDS cards starts with a directive word ('.' and
 * letters) or an element name (R C L V I E G F H K Q M X, and D S W B J, which are
 * refused with a message of their own) and has at least as many
 * words as the shortest card of that kind, with no control character. 0 when it
 * does (an empty file does; a .end card ends the check, as it ends the file),
 * otherwise the line of the first card that does not:
 * the file is then not a netlist, and none of it may be quoted. */
#define TB_NETFILE_SHAPE_CARDS 3
int tb_netfile_foreign_line(const char *text, size_t len);

#endif
