/* codec.c - the table of compressed formats (codec.h). */
#include <string.h>

#include "input/codec.h"

static const mr__codec *const codecs[] = {&mr__codec_zstd, &mr__codec_gzip};
enum { NCODECS = sizeof codecs / sizeof codecs[0] };

const mr__codec *mr__codec_find(const unsigned char *head, size_t n)
{
    size_t i;
    for (i = 0; i < NCODECS; i++)
        if (n >= codecs[i]->magic_len && codecs[i]->claims(head)) return codecs[i];
    return NULL;
}

const char *mr__compression_name(int id)
{
    size_t i;
    if (id == MR__COMPRESSION_NONE) return "none";
    for (i = 0; i < NCODECS; i++)
        if ((int)codecs[i]->id == id) return codecs[i]->name;
    return NULL;
}

int mr__compression_from_name(const char *name)
{
    size_t i;
    if (strcmp(name, "none") == 0) return MR__COMPRESSION_NONE;
    for (i = 0; i < NCODECS; i++)
        if (strcmp(codecs[i]->name, name) == 0) return (int)codecs[i]->id;
    return -1;
}
