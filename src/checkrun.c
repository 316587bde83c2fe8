/* src/checkrun.c: the regression runner behind 'tbeta check': files, shards, threads, baselines */
#include "checkrun.h"

#include <dirent.h>
#include <errno.h>
#include <fnmatch.h>
#include <pthread.h>
#include <stdarg.h>
#include <stdatomic.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

#include <jansson.h>

#include "alloc.h"
#include "circuit.h"
#include "expect.h"

/* Deepest directory nesting searched (a deeper folder is an ERROR entry; link cycles end
 * earlier, each folder being searched once). */
#define MAX_DIR_DEPTH 64
/* Most netlists in one run. */
#define MAX_ENTRIES ((size_t)10000000)
/* Most threads. */
#define MAX_JOBS 1024u

struct tb_check_run {
    tb_check_options opt;
    tb_check_entry *entries;
    size_t count;
    size_t cap;
    atomic_size_t next; /* the next entry a worker takes */
    atomic_bool out_of_memory; /* a worker ran out of memory: the run is incomplete */
    atomic_size_t done;  /* entries finished, for progress */
    tb_progress_fn progress;
    void *progress_ctx;
};

void tb_check_options_init(tb_check_options *opt)
{
    long cores = sysconf(_SC_NPROCESSORS_ONLN);
    opt->glob = "*.net";
    opt->jobs = cores > 0 ? (unsigned)(cores < (long)MAX_JOBS ? cores : (long)MAX_JOBS) : 1u;
    opt->shard_index = 0;
    opt->shard_count = 1;
    opt->drift_pct = 1.0;
    opt->compared = false;
    opt->include_root = NULL;
    opt->include_anywhere = false;
    opt->html_dir = NULL;
    tb_options_init(&opt->analysis);
}

void tb_check_set_progress(tb_check_run *run, tb_progress_fn fn, void *ctx)
{
    run->progress = fn;
    run->progress_ctx = ctx;
}

/* The review page's context for tb_file_write. */
typedef struct {
    const tb_circuit *ckt;
    const tb_result *res;
} page_doc;

static tb_status page_writer(const void *ctx, FILE *out)
{
    const page_doc *d = ctx;
    return tb_report_html(d->ckt, d->res, out);
}

/* e's review page into opt->html_dir, named after e->rel with every character but letters,
 * digits, '.', '-' and '_' written '_'; e->page then holds the link from beside the folder
 * ("FOLDER/NAME.html"). A page that cannot be written is left out (no link). Errors:
 * TB_ERR_NOMEM. */
static tb_status write_page(const tb_check_options *opt, tb_check_entry *e, const tb_circuit *ckt,
                            const tb_result *res)
{
    char *name = tb_check_format("%s.html", e->rel);
    if (!name)
        return TB_ERR_NOMEM;
    for (char *c = name; *c; c++)
        if (!((*c >= 'a' && *c <= 'z') || (*c >= 'A' && *c <= 'Z') || (*c >= '0' && *c <= '9') || *c == '.' ||
              *c == '-' || *c == '_'))
            *c = '_';
    const char *slash = strrchr(opt->html_dir, '/');
    char *path = tb_check_format("%s/%s", opt->html_dir, name);
    e->page = tb_check_format("%s/%s", slash ? slash + 1 : opt->html_dir, name);
    tb_free(name);
    if (!path || !e->page) {
        tb_free(path);
        return TB_ERR_NOMEM;
    }
    char why[1024];
    page_doc doc = {ckt, res};
    (void)mkdir(opt->html_dir, 0777); /* several threads: EEXIST is fine */
    tb_status st = tb_file_write(path, page_writer, &doc, why, sizeof why);
    tb_free(path);
    if (st != TB_OK) {
        tb_free(e->page);
        e->page = NULL;
    }
    return st == TB_ERR_NOMEM ? st : TB_OK;
}

uint64_t tb_check_hash(const char *s)
{
    uint64_t h = 14695981039346656037u; /* FNV-1a, 64 bits */
    for (; *s; s++) {
        h ^= (unsigned char)*s;
        h *= 1099511628211u;
    }
    return h;
}

size_t tb_check_count(const tb_check_run *run)
{
    return run ? run->count : 0;
}

const tb_check_entry *tb_check_get(const tb_check_run *run, size_t i)
{
    return run && i < run->count ? &run->entries[i] : NULL;
}

/* ---- strings -------------------------------------------------------------- */

char *tb_check_strdup(const char *s)
{
    return s ? tb_strndup(s, strlen(s)) : NULL;
}

char *tb_check_format(const char *fmt, ...)
{
    va_list ap;
    va_start(ap, fmt);
    int n = vsnprintf(NULL, 0, fmt, ap);
    va_end(ap);
    if (n < 0)
        return NULL;
    char *s = tb_malloc((size_t)n + 1, 1);
    if (!s)
        return NULL;
    va_start(ap, fmt);
    vsnprintf(s, (size_t)n + 1, fmt, ap);
    va_end(ap);
    return s;
}

/* ---- collecting files ------------------------------------------------------- */

tb_check_entry *tb_check_append(tb_check_run *run)
{
    if (tb_grow(&run->entries, &run->cap, run->count + 1, sizeof(tb_check_entry), MAX_ENTRIES))
        return NULL;
    tb_check_entry *e = &run->entries[run->count++];
    memset(e, 0, sizeof *e);
    return e;
}

tb_check_entry *tb_check_at(tb_check_run *run, size_t i)
{
    return run && i < run->count ? &run->entries[i] : NULL;
}

const tb_check_options *tb_check_opts(const tb_check_run *run)
{
    return &run->opt;
}

void tb_check_set_compared(tb_check_run *run)
{
    run->opt.compared = true;
}

static tb_status add_entry(tb_check_run *run, const char *path, const char *rel)
{
    tb_check_entry *e = tb_check_append(run);
    if (!e)
        return TB_ERR_NOMEM;
    e->path = tb_check_strdup(path);
    e->rel = tb_check_strdup(rel);
    return e->path && e->rel ? TB_OK : TB_ERR_NOMEM;
}

/* An argument that could not be searched: an ERROR entry saying why. */
static tb_status add_unreadable(tb_check_run *run, const char *path, int err)
{
    tb_status st = add_entry(run, path, path);
    if (st != TB_OK)
        return st;
    tb_check_entry *e = &run->entries[run->count - 1];
    e->status = TB_CHECK_ERROR;
    e->errors = tb_check_format("%s: error: cannot read '%s': %s\n", path, path, strerror(err));
    return e->errors ? TB_OK : TB_ERR_NOMEM;
}

/* ---- each directory and file once ---------------------------------------------- */

/* The (device, inode) pairs met while collecting, in an open-addressing table: a file or
 * folder reached again (a second argument, a symbolic link, a link cycle) is skipped. */
typedef struct {
    dev_t dev;
    ino_t ino;
    bool used;
} seen_slot;

typedef struct {
    seen_slot *slots;
    size_t cap; /* a power of two, or 0 */
    size_t count;
} seen_set;

static size_t seen_slot_of(const seen_slot *slots, size_t cap, dev_t dev, ino_t ino)
{
    uint64_t h = ((uint64_t)dev * 0x9E3779B97F4A7C15u) ^ (uint64_t)ino;
    h = (h ^ (h >> 31)) * 0xBF58476D1CE4E5B9u;
    size_t i = (size_t)(h ^ (h >> 29)) & (cap - 1);
    while (slots[i].used && !(slots[i].dev == dev && slots[i].ino == ino))
        i = (i + 1) & (cap - 1);
    return i;
}

/* Doubles the table (at least 64 slots). */
static tb_status seen_grow(seen_set *set)
{
    size_t cap = set->cap ? 2 * set->cap : 64;
    if (cap > 4 * MAX_ENTRIES)
        return TB_ERR_NOMEM;
    seen_slot *slots = tb_calloc(cap, sizeof(seen_slot));
    if (!slots)
        return TB_ERR_NOMEM;
    for (size_t i = 0; i < set->cap; i++)
        if (set->slots[i].used)
            slots[seen_slot_of(slots, cap, set->slots[i].dev, set->slots[i].ino)] = set->slots[i];
    tb_free(set->slots);
    set->slots = slots;
    set->cap = cap;
    return TB_OK;
}

/* Records the file or folder of sb; *first is false when it was met before. */
static tb_status seen_add(seen_set *set, const struct stat *sb, bool *first)
{
    if (2 * (set->count + 1) > set->cap && seen_grow(set) != TB_OK)
        return TB_ERR_NOMEM;
    seen_slot *slot = &set->slots[seen_slot_of(set->slots, set->cap, sb->st_dev, sb->st_ino)];
    *first = !slot->used;
    if (*first) {
        slot->dev = sb->st_dev;
        slot->ino = sb->st_ino;
        slot->used = true;
        set->count++;
    }
    return TB_OK;
}

/* ---- walking folders ------------------------------------------------------------ */

/* A symbolic link met in a folder, followed once the real entries are all in. */
typedef struct {
    char *path;
    int depth;
} link_later;

/* One search: the run it fills, what it has met, where relative names start, and the links
 * still to follow. */
typedef struct {
    tb_check_run *run;
    seen_set seen;
    size_t root_len;
    link_later *links;
    size_t link_count;
    size_t link_cap;
} walker;

static tb_status walk(walker *w, const char *dir, int depth);

/* The file or folder at path (stat sb), reached by name in a folder at depth. */
static tb_status take(walker *w, const char *path, const char *name, const struct stat *sb, int depth)
{
    bool first = false;
    tb_status st = TB_OK;
    if (S_ISDIR(sb->st_mode) && (st = seen_add(&w->seen, sb, &first)) == TB_OK && first)
        st = walk(w, path, depth + 1);
    else if (S_ISREG(sb->st_mode) && fnmatch(w->run->opt.glob, name, 0) == 0 &&
             (st = seen_add(&w->seen, sb, &first)) == TB_OK && first)
        st = add_entry(w->run, path, path + w->root_len);
    return st;
}

/* One directory entry name inside dir; a symbolic link is kept for later. */
static tb_status visit(walker *w, const char *dir, const char *name, int depth)
{
    char *path = tb_check_format("%s/%s", dir, name);
    if (!path)
        return TB_ERR_NOMEM;
    struct stat sb;
    tb_status st = TB_OK;
    if (lstat(path, &sb) != 0) {
        st = add_unreadable(w->run, path, errno);
    } else if (S_ISLNK(sb.st_mode)) {
        st = tb_grow(&w->links, &w->link_cap, w->link_count + 1, sizeof(link_later), MAX_ENTRIES);
        if (st == TB_OK) {
            w->links[w->link_count++] = (link_later){path, depth};
            return TB_OK;
        }
    } else {
        st = take(w, path, name, &sb, depth);
    }
    tb_free(path);
    return st;
}

/* Follows the links met so far, in the order met (following one may add more), each after
 * every real entry of the search: a file reached both directly and through a link is checked
 * under its direct path. */
static tb_status follow_links(walker *w)
{
    tb_status st = TB_OK;
    for (size_t i = 0; st == TB_OK && i < w->link_count; i++) {
        const char *path = w->links[i].path;
        const char *slash = strrchr(path, '/');
        const char *name = slash ? slash + 1 : path;
        struct stat sb;
        if (stat(path, &sb) == 0)
            st = take(w, path, name, &sb, w->links[i].depth);
        else if (fnmatch(w->run->opt.glob, name, 0) == 0) /* a broken link to a netlist */
            st = add_unreadable(w->run, path, errno);
    }
    for (size_t i = 0; i < w->link_count; i++)
        tb_free(w->links[i].path);
    w->link_count = 0;
    return st;
}

static int by_name(const void *a, const void *b)
{
    return strcmp(*(char *const *)a, *(char *const *)b);
}

/* The names in d that are not hidden ("." and ".." included), sorted bytewise, so that the
 * search (and which of two paths to one file is kept) does not depend on the file system. */
static tb_status list_dir(DIR *d, char ***names, size_t *count)
{
    size_t cap = 0;
    struct dirent *de;
    while ((de = readdir(d)) != NULL) {
        if (de->d_name[0] == '.')
            continue;
        if (tb_grow(names, &cap, *count + 1, sizeof(char *), MAX_ENTRIES) != TB_OK)
            return TB_ERR_NOMEM;
        if (!((*names)[*count] = tb_check_strdup(de->d_name)))
            return TB_ERR_NOMEM;
        ++*count;
    }
    if (*count > 1)
        qsort(*names, *count, sizeof(char *), by_name);
    return TB_OK;
}

/* Adds the matching files under dir, in name order; rel names start at dir[w->root_len]. */
static tb_status walk(walker *w, const char *dir, int depth)
{
    if (depth > MAX_DIR_DEPTH)
        return add_unreadable(w->run, dir, ELOOP);
    DIR *d = opendir(dir);
    if (!d)
        return add_unreadable(w->run, dir, errno);
    char **names = NULL;
    size_t count = 0;
    tb_status st = list_dir(d, &names, &count);
    closedir(d);
    for (size_t i = 0; st == TB_OK && i < count; i++)
        st = visit(w, dir, names[i], depth);
    for (size_t i = 0; i < count; i++)
        tb_free(names[i]);
    tb_free(names);
    return st;
}

static int by_path(const void *a, const void *b)
{
    return strcmp(((const tb_check_entry *)a)->path, ((const tb_check_entry *)b)->path);
}

static void free_entry(tb_check_entry *e);
static void clear_results(tb_check_entry *e);

/* Keeps the entries of this shard (fnv1a(rel) % count == index). */
static void keep_shard(tb_check_run *run)
{
    size_t kept = 0;
    for (size_t i = 0; i < run->count; i++) {
        tb_check_entry *e = &run->entries[i];
        if (tb_check_hash(e->rel) % run->opt.shard_count == run->opt.shard_index)
            run->entries[kept++] = *e;
        else
            free_entry(e);
    }
    run->count = kept;
}

/* One argument: a file as it is, or a directory searched recursively; either is skipped
 * when an earlier argument reached it already. */
static tb_status collect_one(walker *w, const char *arg)
{
    struct stat sb;
    bool first = false;
    if (stat(arg, &sb) != 0)
        return add_unreadable(w->run, arg, errno);
    tb_status st = seen_add(&w->seen, &sb, &first);
    if (st != TB_OK || !first)
        return st;
    if (!S_ISDIR(sb.st_mode))
        return add_entry(w->run, arg, arg);
    size_t len = strlen(arg);
    while (len > 1 && arg[len - 1] == '/')
        len--;
    char *root = tb_strndup(arg, len);
    if (!root)
        return TB_ERR_NOMEM;
    w->root_len = len + (root[len - 1] == '/' ? 0 : 1);
    st = walk(w, root, 0);
    tb_status followed = follow_links(w); /* frees the list whatever st is */
    tb_free(root);
    if (st == TB_OK)
        st = followed;
    return st;
}

tb_status tb_check_collect(const char *const *paths, size_t count, const tb_check_options *opt,
                           tb_check_run **out)
{
    if ((!paths && count) || !opt || !out || opt->shard_count == 0 ||
        opt->shard_index >= opt->shard_count || opt->jobs == 0)
        return TB_ERR_USAGE;
    tb_check_run *run = tb_calloc(1, sizeof *run);
    if (!run)
        return TB_ERR_NOMEM;
    run->opt = *opt;
    atomic_init(&run->next, 0);
    atomic_init(&run->out_of_memory, false);
    walker w = {run, {NULL, 0, 0}, 0, NULL, 0, 0};
    tb_status st = TB_OK;
    for (size_t i = 0; i < count && st == TB_OK; i++)
        st = collect_one(&w, paths[i]);
    tb_free(w.seen.slots);
    tb_free(w.links);
    if (st != TB_OK) {
        tb_check_free(run);
        return st;
    }
    keep_shard(run);
    tb_check_sort(run);
    *out = run;
    return TB_OK;
}

void tb_check_sort(tb_check_run *run)
{
    if (run && run->count > 1)
        qsort(run->entries, run->count, sizeof(tb_check_entry), by_path);
}

/* ---- one netlist ------------------------------------------------------------ */

/* Diagnostics of one severity (or all, sev 0) formatted into one string in *out, which
 * stays NULL when there are none. Errors: TB_ERR_NOMEM. */
static tb_status diag_text(const tb_diag *diag, int sev, char **out)
{
    size_t total = 0;
    for (size_t i = 0; i < tb_diag_count(diag); i++)
        if (!sev || (int)tb_diag_get(diag, i)->severity == sev)
            total += tb_diag_format(diag, i, NULL, 0);
    if (total == 0)
        return TB_OK;
    char *s = tb_malloc(total + 1, 1);
    if (!s)
        return TB_ERR_NOMEM;
    size_t n = 0;
    for (size_t i = 0; i < tb_diag_count(diag); i++)
        if (!sev || (int)tb_diag_get(diag, i)->severity == sev)
            n += tb_diag_format(diag, i, s + n, total + 1 - n);
    *out = s;
    return TB_OK;
}

/* Every figure of loop l into lp. */
static tb_status measure(const tb_circuit *ckt, const tb_result *res, size_t l, tb_check_loop *lp)
{
    size_t n = tb_figure_count();
    tb_figure_value *v = tb_calloc(n, sizeof(tb_figure_value));
    lp->name = tb_check_strdup(tb_circuit_loop_name(ckt, l));
    lp->figures = tb_calloc(n, sizeof(tb_check_figure));
    tb_status rc = v && lp->name && lp->figures ? tb_figure_measure(res, l, v) : TB_ERR_NOMEM;
    for (size_t f = 0; rc == TB_OK && f < n; f++) {
        tb_check_figure *fig = &lp->figures[f];
        fig->figure = (int)f;
        fig->present = v[f].present;
        fig->value = v[f].value;
        if (!fig->present && !(fig->why = tb_check_strdup(v[f].why)))
            rc = TB_ERR_NOMEM;
    }
    tb_free(v);
    return rc;
}

/* Evaluates every .expect of ckt against the measured loops. */
static tb_status evaluate(const tb_circuit *ckt, tb_check_entry *e)
{
    char bound[160];
    char measured[96];
    e->expects = tb_calloc(ckt->expect_count ? ckt->expect_count : 1, sizeof(tb_check_expect));
    if (!e->expects)
        return TB_ERR_NOMEM;
    for (const tb_expect *x = ckt->expects; x; x = x->next) {
        tb_check_expect *r = &e->expects[e->expect_count++];
        const tb_check_figure *fig = &e->loops[x->loop].figures[x->figure];
        r->target = tb_check_strdup(x->target);
        r->line = x->loc.line;
        r->figure = x->figure;
        r->present = fig->present;
        r->value = fig->value;
        r->pass = tb_expect_holds(x, fig->present, fig->value);
        r->bound = tb_check_strdup(tb_expect_bound_text(x, bound, sizeof bound));
        tb_figure_text(x->figure, fig->present, fig->value, measured, sizeof measured);
        r->measured = fig->present ? tb_check_strdup(measured) : tb_check_format("absent (%s)", fig->why);
        if (!r->target || !r->bound || !r->measured)
            return TB_ERR_NOMEM;
        if (!r->pass)
            e->status = TB_CHECK_FAIL;
    }
    return TB_OK;
}

/* Reads, analyses and evaluates e->path; diagnostics go to e->errors/e->warnings. A netlist
 * that cannot be read or analysed makes e an ERROR entry. Errors: TB_ERR_NOMEM (e then holds
 * part of its results). */
static tb_status run_one(const tb_check_options *opt, tb_check_entry *e)
{
    tb_diag *diag = tb_diag_new();
    tb_circuit *ckt = NULL;
    tb_result *res = NULL;
    if (!diag)
        return TB_ERR_NOMEM;
    /* .include stays inside the library: the folder of the argument the netlist came from
     * (path = argument + "/" + rel), or the folder asked for */
    char root[4096];
    tb_read_options ro;
    tb_read_options_init(&ro);
    if (!opt->include_anywhere) {
        size_t pl = strlen(e->path), rl = strlen(e->rel);
        if (opt->include_root)
            snprintf(root, sizeof root, "%s", opt->include_root);
        else if (pl > rl && strcmp(e->path + pl - rl, e->rel) == 0)
            snprintf(root, sizeof root, "%.*s", (int)(pl - rl), e->path);
        else
            snprintf(root, sizeof root, "%s", e->path);
        size_t n = strlen(root);
        while (n > 1 && root[n - 1] == '/')
            root[--n] = '\0';
        if (!opt->include_root && pl <= rl) { /* a file given by itself: its own folder */
            char *slash = strrchr(root, '/');
            if (slash && slash != root)
                *slash = '\0';
            else
                snprintf(root, sizeof root, "%s", slash ? "/" : ".");
        }
        ro.include_root = root;
    }
    tb_status st = tb_circuit_read_with(e->path, &ro, diag, &ckt); /* resolves .expect loop names */
    if (st == TB_OK)
        st = tb_analyse(ckt, &opt->analysis, diag, &res);
    if (st == TB_OK) {
        e->loops = tb_calloc(tb_result_loops(res), sizeof(tb_check_loop));
        st = e->loops ? TB_OK : TB_ERR_NOMEM;
        for (size_t l = 0; st == TB_OK && l < tb_result_loops(res); l++, e->loop_count++)
            st = measure(ckt, res, l, &e->loops[l]);
    }
    if (st == TB_OK)
        st = evaluate(ckt, e);
    if (st == TB_OK && opt->html_dir)
        st = write_page(opt, e, ckt, res);
    if (st != TB_OK && st != TB_ERR_NOMEM) {
        e->status = TB_CHECK_ERROR;
        tb_status failed = st;
        st = diag_text(diag, TB_SEV_ERROR, &e->errors);
        if (st == TB_OK && !e->errors)
            e->errors = tb_check_format("%s: error: %s\n", e->path, tb_status_str(failed));
        if (st == TB_OK && !e->errors)
            st = TB_ERR_NOMEM;
    }
    if (st == TB_OK)
        st = diag_text(diag, TB_SEV_WARNING, &e->warnings);
    tb_result_free(res);
    tb_circuit_free(ckt);
    tb_diag_free(diag);
    return st;
}

/* A worker: takes the next entry until none is left. */
static void *worker(void *arg)
{
    tb_check_run *run = arg;
    for (;;) {
        size_t i = atomic_fetch_add(&run->next, 1);
        if (i >= run->count)
            return NULL;
        tb_check_entry *e = &run->entries[i];
        if (e->status == TB_CHECK_ERROR)
            continue; /* could not be collected */
        if (run_one(&run->opt, e) != TB_OK) {
            clear_results(e); /* no half-made results stay behind */
            e->status = TB_CHECK_ERROR;
            atomic_store(&run->out_of_memory, true);
        }
        size_t done = atomic_fetch_add(&run->done, 1) + 1;
        if (run->progress)
            run->progress(run->progress_ctx, done, run->count);
    }
}

tb_status tb_check_execute(tb_check_run *run)
{
    if (!run)
        return TB_ERR_USAGE;
    unsigned jobs = run->opt.jobs;
    if (jobs > run->count)
        jobs = run->count ? (unsigned)run->count : 1u;
    atomic_store(&run->next, 0);
    atomic_store(&run->done, 0);
    atomic_store(&run->out_of_memory, false);
    pthread_t *threads = tb_calloc(jobs, sizeof(pthread_t));
    if (!threads)
        return TB_ERR_NOMEM;
    unsigned started = 0;
    while (started + 1 < jobs && pthread_create(&threads[started], NULL, worker, run) == 0)
        started++;
    worker(run); /* the calling thread works too */
    for (unsigned t = 0; t < started; t++)
        pthread_join(threads[t], NULL);
    tb_free(threads);
    return atomic_load(&run->out_of_memory) ? TB_ERR_NOMEM : TB_OK;
}

/* ---- freeing -------------------------------------------------------------- */

/* Frees what e holds beyond its path: diagnostics, figures, expectations, drifts. */
static void clear_results(tb_check_entry *e)
{
    tb_free(e->errors);
    tb_free(e->warnings);
    tb_free(e->page);
    for (size_t l = 0; l < e->loop_count; l++) {
        for (size_t f = 0; e->loops[l].figures && f < tb_figure_count(); f++)
            tb_free(e->loops[l].figures[f].why);
        tb_free(e->loops[l].figures);
        tb_free(e->loops[l].name);
    }
    tb_free(e->loops);
    for (size_t i = 0; i < e->expect_count; i++) {
        tb_free(e->expects[i].target);
        tb_free(e->expects[i].bound);
        tb_free(e->expects[i].measured);
    }
    tb_free(e->expects);
    for (size_t i = 0; i < e->drift_count; i++) {
        tb_free(e->drifts[i].target);
        tb_free(e->drifts[i].was);
        tb_free(e->drifts[i].now);
    }
    tb_free(e->drifts);
    char *path = e->path;
    char *rel = e->rel;
    memset(e, 0, sizeof *e);
    e->path = path;
    e->rel = rel;
}

static void free_entry(tb_check_entry *e)
{
    clear_results(e);
    tb_free(e->path);
    tb_free(e->rel);
    memset(e, 0, sizeof *e);
}

void tb_check_free(tb_check_run *run)
{
    if (!run)
        return;
    for (size_t i = 0; i < run->count; i++)
        free_entry(&run->entries[i]);
    tb_free(run->entries);
    tb_free(run);
}

int tb_check_exit_code(const tb_check_run *run)
{
    int code = 0;
    for (size_t i = 0; run && i < run->count; i++) {
        if (run->entries[i].status == TB_CHECK_ERROR)
            return 2;
        if (run->entries[i].status == TB_CHECK_FAIL)
            code = 1;
    }
    return code;
}
