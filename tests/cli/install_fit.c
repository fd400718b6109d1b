/* install_fit.c - a program built against an installed millrace, the way a
 * user would (tests/cli/install.sh compiles it with pkg-config, against the
 * shared and then the static library).  Fits DATA with MODEL through the
 * public API alone and prints one coefficient with all its digits.
 * Usage: install_fit DATA MODEL COEFFICIENT */
#include <stdio.h>
#include <string.h>

#include <millrace.h>

static int print_coefficient(const mr_fit *fit, const char *name)
{
    size_t j;
    for (j = 0; j < mr_fit_ncoef(fit); j++) {
        if (strcmp(mr_fit_coef_name(fit, j), name) == 0) {
            printf("%s %.17g\n", name, mr_fit_coef(fit, j));
            return 0;
        }
    }
    fprintf(stderr, "install_fit: no coefficient '%s'\n", name);
    return 1;
}

int main(int argc, char **argv)
{
    mr_fitter *fitter;
    mr_fit *fit = NULL;
    mr_status st;
    int rc;
    if (argc != 4) {
        fprintf(stderr, "usage: install_fit DATA MODEL COEFFICIENT\n");
        return 2;
    }
    fitter = mr_fitter_new();
    if (fitter == NULL) return (int)MR_ERR_NO_MEMORY;
    st = mr_fitter_model_file(fitter, argv[2]);
    if (st == MR_OK) st = mr_fitter_run(fitter, argv[1], &fit);
    if (st != MR_OK) {
        fprintf(stderr, "install_fit: %s: %s\n", mr_strerror(st), mr_fitter_errmsg(fitter));
        mr_fitter_free(fitter);
        return (int)st;
    }
    rc = mr_fit_status(fit) == MR_OK ? print_coefficient(fit, argv[3]) : (int)mr_fit_status(fit);
    mr_fit_free(fit);
    mr_fitter_free(fitter);
    return rc;
}
