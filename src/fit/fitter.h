/* fitter.h - the struct behind mr_fitter: a model and the options of a run. */
#ifndef MR_FITTER_H
#define MR_FITTER_H

#include "common/error.h"
#include "model/spec.h"

struct mr__start;

struct mr_fitter {
    mr__spec spec;
    mr__error err;
    int threads, max_passes, in_memory, skip_bad, delimiter, no_cache, no_collapse;
    size_t buffer_size;
    double tolerance, level;
    char **missing;
    size_t nmissing;
    mr_progress_fn progress;
    mr_progress_stop_fn progress_stop; /* at most one of the two is set */
    void *progress_user;
    char **command_line; /* mr_fitter_set_command_line's copy */
    size_t ncommand_line;
    struct mr__start *start; /* mr_fitter_set_start; NULL: none (start.h) */
    int robust;              /* an mr_robust (robust.c) */
    char *cluster;           /* mr_fitter_set_cluster's column; NULL: none */
    size_t cluster_memory;   /* bytes its bookkeeping may take */
    char *checkpoint;        /* mr_fitter_set_checkpoint's copy; NULL: none */
    char checkpoint_note[MR__MSG_CAP + 256]; /* what the last run did with it */
    int many_means;          /* MR_OPT_MANY_MEANS */
    int checkpoint_keep;     /* MR_OPT_KEEP_CHECKPOINT: the checkpoint outlives a fit that succeeded */
    struct mr_share *share;  /* mr_fitter_set_share's, borrowed; NULL: none (fit/share.h) */
};

/* The robust standard errors a run makes (an mr_robust): the one set, or
 * HC0 when only a cluster column is (robust.c). */
int mr__robust_type(const mr_fitter *f);
/* With a factor declared `many`, its levels are the only clusters taken
 * (robust.c): MR_ERR_USAGE for another cluster column. */
mr_status mr__robust_check(const mr_fitter *f, mr__error *err);

/* The fit's audit trail (fitter.c): the command line, the host, the run's
 * start (started_ns, wall clock) and end.  MR_OK or MR_ERR_NO_MEMORY. */
mr_status mr__fitter_record_run(const mr_fitter *f, mr_fit *fit, int64_t started_ns, mr__error *err);

/* A fitter of f's settings with a copy of its model of its own, for a
 * model fitted beside f's (compare's drop-one models, a profile's
 * values): f's other pointers are borrowed, so it goes with
 * mr__fitter_twin_free, never mr_fitter_free.  NULL when out of memory
 * (err says so). */
mr_fitter *mr__fitter_twin(const mr_fitter *f, mr__error *err);
void mr__fitter_twin_free(mr_fitter *g);

/* The fit itself (run.c). */
mr_status mr__fit_file(mr_fitter *f, const char *path, mr_fit **out);
/* Several files (or directories) read as one (input/inputset.h). */
mr_status mr__fit_files(mr_fitter *f, const char *const *paths, size_t n, mr_fit **out);
/* The family's parameter chosen by profile likelihood over its grid: one
 * mr__fit_file after another (fit/profile.c). */
mr_status mr__fit_profile(mr_fitter *f, const char *path, mr_fit **out);

#endif
