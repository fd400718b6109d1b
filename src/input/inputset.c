/* inputset.c - several files as one data set (inputset.h). */
#define _POSIX_C_SOURCE 200809L
#include <dirent.h>
#include <errno.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>

#include "common/alloc.h"
#include "common/checksum.h"
#include "input/fields.h"
#include "input/inputset.h"

int mr__path_is_directory(const char *path)
{
    struct stat st;
    return strcmp(path, "-") != 0 && stat(path, &st) == 0 && S_ISDIR(st.st_mode);
}

static mr_status add_file(mr__inputset *set, size_t *cap, const char *path, mr__error *err)
{
    struct stat st;
    if (strcmp(path, "-") == 0)
        return mr__fail(err, MR_ERR_USAGE, "standard input ('-') cannot be one of several inputs");
    if (stat(path, &st) != 0) return mr__fail(err, MR_ERR_IO, "%s: cannot open: %s", path, strerror(errno));
    if (!S_ISREG(st.st_mode))
        return mr__fail(err, MR_ERR_USAGE, "%s: not a regular file (each of several inputs is read more than once)",
                        path);
    if (set->n == *cap) {
        size_t nc = *cap ? 2 * *cap : 8;
        char **p = mr__realloc(set->path, nc * sizeof *p);
        if (p == NULL) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
        set->path = p;
        *cap = nc;
    }
    if ((set->path[set->n] = mr__strdup(path)) == NULL) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    set->n++;
    set->total_size += (uint64_t)st.st_size;
    return MR_OK;
}

static int by_bytes(const void *a, const void *b) { return strcmp(*(char *const *)a, *(char *const *)b); }

/* The directory's visible names, sorted by their bytes. */
static mr_status list_directory(const char *dir, char ***names, size_t *n, mr__error *err)
{
    DIR *d = opendir(dir);
    struct dirent *de;
    size_t cap = 0;
    *names = NULL;
    *n = 0;
    if (d == NULL) return mr__fail(err, MR_ERR_IO, "%s: cannot open: %s", dir, strerror(errno));
    while ((de = readdir(d)) != NULL) {
        if (de->d_name[0] == '.') continue;
        if (*n == cap) {
            char **p = mr__realloc(*names, (cap = cap ? 2 * cap : 16) * sizeof *p);
            if (p == NULL) break;
            *names = p;
        }
        if (((*names)[*n] = mr__strdup(de->d_name)) == NULL) break;
        ++*n;
    }
    closedir(d);
    if (de != NULL) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    if (*n > 0) qsort(*names, *n, sizeof **names, by_bytes);
    return MR_OK;
}

/* Every regular file of the directory, in order; subdirectories and
 * other kinds are passed over. */
static mr_status add_directory(mr__inputset *set, size_t *cap, const char *dir, mr__error *err)
{
    char **names, *full = NULL;
    size_t n, i, before = set->n;
    mr_status st = list_directory(dir, &names, &n, err);
    for (i = 0; st == MR_OK && i < n; i++) {
        size_t len = strlen(dir) + strlen(names[i]) + 2;
        struct stat sb;
        mr__free(full);
        if ((full = mr__malloc(len)) == NULL) {
            st = mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
            break;
        }
        strcpy(full, dir);
        if (len > 2 && full[strlen(full) - 1] != '/') strcat(full, "/");
        strcat(full, names[i]);
        if (stat(full, &sb) == 0 && S_ISREG(sb.st_mode)) st = add_file(set, cap, full, err);
    }
    mr__free(full);
    for (i = 0; i < n; i++) mr__free(names[i]);
    mr__free(names);
    if (st == MR_OK && set->n == before)
        st = mr__fail(err, MR_ERR_NO_DATA, "%s: the directory holds no data file (names starting with '.' are passed over)",
                      dir);
    return st;
}

mr_status mr__inputset_build(mr__inputset *set, const char *const *paths, size_t n, mr__error *err)
{
    size_t cap = 0, i;
    mr_status st = MR_OK;
    memset(set, 0, sizeof *set);
    for (i = 0; st == MR_OK && i < n; i++)
        st = mr__path_is_directory(paths[i]) ? add_directory(set, &cap, paths[i], err) : add_file(set, &cap, paths[i], err);
    if (st == MR_OK && set->n == 0) st = mr__fail(err, MR_ERR_USAGE, "no input given");
    if (st == MR_OK && (set->display = mr__calloc(set->n, sizeof *set->display)) == NULL)
        st = mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    for (i = 0; st == MR_OK && i < set->n; i++) set->display[i] = set->path[i];
    if (st != MR_OK) mr__inputset_release(set);
    return st;
}

void mr__inputset_release(mr__inputset *set)
{
    size_t i;
    for (i = 0; i < set->n; i++) mr__free(set->path[i]);
    mr__free(set->path);
    mr__free(set->display);
    memset(set, 0, sizeof *set);
}

static mr_status differ(const char *first_display, const char *display, size_t col, const char *a, const char *b,
                        mr__error *err)
{
    if (a == NULL)
        return mr__fail(err, MR_ERR_FORMAT, "%s:1: the header has more columns than %s's (column %zu, '%s', is extra)",
                        display, first_display, col + 1, b);
    if (b == NULL)
        return mr__fail(err, MR_ERR_FORMAT, "%s:1: the header has fewer columns than %s's (column %zu, '%s', is missing)",
                        display, first_display, col + 1, a);
    return mr__fail(err, MR_ERR_FORMAT, "%s:1:%zu: the header differs from %s's: '%s' where it has '%s'", display,
                    col + 1, first_display, b, a);
}

mr_status mr__inputset_check_header(const char *first, size_t first_len, const char *first_display,
                                    const char *line, size_t len, const char *display, char delim, mr__error *err)
{
    char **a = NULL, **b = NULL;
    size_t na = 0, nb = 0, i;
    mr_status st;
    if (len == first_len && memcmp(first, line, len) == 0) return MR_OK;
    if (delim == 0) delim = mr__detect_delimiter(first, first_len);
    st = mr__parse_header(first, first_len, delim, &a, &na, first_display, err);
    if (st == MR_OK) st = mr__parse_header(line, len, delim, &b, &nb, display, err);
    for (i = 0; st == MR_OK && (i < na || i < nb); i++)
        if (i >= na || i >= nb || strcmp(a[i], b[i]) != 0)
            st = differ(first_display, display, i, i < na ? a[i] : NULL, i < nb ? b[i] : NULL, err);
    mr__free_names(a, na);
    mr__free_names(b, nb);
    return st;
}

uint64_t mr__inputset_checksum(const mr__file_identity *files, size_t n)
{
    uint64_t h = MR__FNV_OFFSET;
    size_t i;
    for (i = 0; i < n; i++) {
        char w[8];
        int k;
        for (k = 0; k < 8; k++) w[k] = (char)(files[i].checksum >> (8 * k));
        h = mr__fnv_words(h, w, 8);
    }
    return h;
}
