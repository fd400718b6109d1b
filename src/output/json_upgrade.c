/* json_upgrade.c - format version 2 of the fit's JSON read as version 3:
 * the same numbers under the names version 3 chose (see json_upgrade.h).
 * Only names change, so a version 2 file reads to the same fit, bit for
 * bit, that version 3 would have written. */
#include <string.h>

#include "model/design.h"
#include "output/json_upgrade.h"

static const char OLD_INTERCEPT[] = "(intercept)";

/* The value under `from` moved to `to` (nothing when `from` is absent). */
static int rename_key(json_t *o, const char *from, const char *to)
{
    json_t *v = json_object_get(o, from);
    if (!json_is_object(o) || v == NULL) return 0;
    if (json_object_set(o, to, v) != 0) return -1;
    return json_object_del(o, from) == 0 ? 0 : -1;
}

static int upgrade_coefficient(json_t *c)
{
    json_t *name = json_object_get(c, "name");
    if (rename_key(c, "std_error", "standard_error") != 0) return -1;
    if (json_is_string(name) && strcmp(json_string_value(name), OLD_INTERCEPT) == 0)
        return json_string_set(name, MR__INTERCEPT_NAME) == 0 ? 0 : -1;
    return 0;
}

static int named(json_t *c, const char *name)
{
    json_t *v = json_object_get(c, "name");
    return json_is_string(v) && strcmp(json_string_value(v), name) == 0;
}

/* Version 2 let a column called intercept sit beside "(intercept)". */
static int names_clash(json_t *coefs)
{
    json_t *c;
    size_t i;
    int old = 0, new = 0;
    json_array_foreach(coefs, i, c) {
        old |= named(c, OLD_INTERCEPT);
        new |= named(c, MR__INTERCEPT_NAME);
    }
    return old && new;
}

int mr__json_upgrade(json_t *root)
{
    json_t *coefs = json_object_get(root, "coefficients"), *c;
    json_t *fit = json_object_get(root, "fit");
    size_t i;
    if (names_clash(coefs)) return 1;
    json_array_foreach(coefs, i, c)
        if (json_is_object(c) && upgrade_coefficient(c) != 0) return -1;
    if (rename_key(fit, "df_residual", "residual_df") != 0 || rename_key(fit, "df_null", "null_df") != 0) return -1;
    return json_object_set_new(root, "format_version", json_integer(3)) == 0 ? 0 : -1;
}
