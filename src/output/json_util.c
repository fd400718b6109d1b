#include <math.h>
#include <string.h>

#include "common/alloc.h"
#include "common/outfile.h"
#include "output/json_text.h"
#include "output/json_util.h"

json_t *mr__json_append(json_t *a, json_t *v)
{
    if (a != NULL && json_array_append_new(a, v) == 0) return a;
    if (a == NULL) json_decref(v);
    json_decref(a);
    return NULL;
}

json_t *mr__json_put(json_t *o, const char *key, json_t *v)
{
    char *k = o != NULL && v != NULL ? mr__json_escape(key) : NULL;
    int ok = k != NULL && json_object_set_new(o, k, v) == 0;
    if (k == NULL) json_decref(v);
    mr__free(k);
    if (ok) return o;
    json_decref(o);
    return NULL;
}

json_t *mr__json_num(double x) { return isfinite(x) ? json_real(x) : json_null(); }

typedef struct json_sink {
    mr__outfile *out;
    mr__error *err;
} json_sink;

static int to_outfile(const char *buf, size_t size, void *data)
{
    json_sink *s = data;
    return mr__outfile_write(s->out, buf, size, s->err) == MR_OK ? 0 : -1;
}

mr_status mr__json_write_file(json_t *root, const char *path, const char *const *inputs, size_t ninputs,
                              mr__error *err)
{
    const size_t flags = MR__JSON_FILE_FLAGS;
    json_sink sink = {NULL, err};
    MR__TRY(mr__outfile_open(&sink.out, path, inputs, ninputs, err));
    if (json_dump_callback(root, to_outfile, &sink, flags) != 0 || to_outfile("\n", 1, &sink) != 0) {
        /* jansson fails on its own only for want of memory */
        if (err->status == MR_OK) mr__fail(err, MR_ERR_NO_MEMORY, "%s: out of memory writing the JSON", path);
        mr__outfile_abort(sink.out);
        return err->status;
    }
    return mr__outfile_commit(sink.out, err);
}

mr_status mr__json_line(json_t *root, char **out, size_t *n, mr__error *err)
{
    const size_t flags = JSON_COMPACT | JSON_REAL_PRECISION(17) | JSON_PRESERVE_ORDER;
    size_t size = json_dumpb(root, NULL, 0, flags);
    *out = size > 0 ? mr__malloc(size + 2) : NULL;
    if (*out == NULL || json_dumpb(root, *out, size, flags) != size)
        return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory writing a JSON line");
    (*out)[size] = '\n';
    (*out)[size + 1] = '\0';
    *n = size + 1;
    return MR_OK;
}
