/* mpi_main.c - millrace-mpi (make mpi), run as `mpirun -np N millrace-mpi
 * fit [options] DATA...`: the fit command (cmd_fit.c) shared by N
 * processes through OpenMPI (mr_share in millrace.h, fit/share.c).  Rank
 * 0 is the command as a user knows it: the report, messages, progress,
 * the JSON and the run log.  The other ranks write nothing (their
 * standard output and error go to /dev/null) and exit with the code every
 * rank agreed on.  Built only by `make mpi`, with mpicc: the plain build
 * needs no MPI. */
#define _POSIX_C_SOURCE 200809L
#include <limits.h>
#include <mpi.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "cli.h"

/* Memory for an exchange failed on this rank alone: the others would wait
 * for it for ever, so every rank ends here. */
static void abort_all(MPI_Comm comm)
{
    fprintf(stderr, "millrace: out of memory for an exchange between processes\n");
    MPI_Abort(comm, (int)MR_ERR_NO_MEMORY);
}

/* The lengths every rank sends, and from them each one's place. */
static int places(MPI_Comm comm, size_t len, size_t *lens, int *counts, int *displs, int n, size_t *total)
{
    unsigned long long mine = len, *all = malloc((size_t)n * sizeof *all);
    int k, fits = 1;
    if (all == NULL) abort_all(comm);
    MPI_Allgather(&mine, 1, MPI_UNSIGNED_LONG_LONG, all, 1, MPI_UNSIGNED_LONG_LONG, comm);
    *total = 0;
    for (k = 0; k < n; k++) {
        /* MPI counts are ints: every rank sees the same lengths, so all
         * refuse alike */
        if (all[k] > (unsigned long long)(INT_MAX - *total)) fits = 0;
        lens[k] = (size_t)all[k];
        counts[k] = fits ? (int)all[k] : 0;
        displs[k] = fits ? (int)*total : 0;
        if (fits) *total += (size_t)all[k];
    }
    free(all);
    return fits;
}

/* mr_share_gather_fn over MPI: the lengths, then the bytes (below 2 GiB
 * in all). */
static int gather(void *user, const void *mine, size_t len, void **all, size_t *lens)
{
    MPI_Comm comm = *(MPI_Comm *)user;
    int n, *counts, *displs, fits;
    size_t total;
    char *buf;
    MPI_Comm_size(comm, &n);
    counts = malloc((size_t)n * sizeof *counts);
    displs = malloc((size_t)n * sizeof *displs);
    if (counts == NULL || displs == NULL) abort_all(comm);
    fits = places(comm, len, lens, counts, displs, n, &total);
    buf = fits ? malloc(total + 1) : NULL;
    if (fits && buf == NULL) abort_all(comm);
    if (fits) MPI_Allgatherv(mine, (int)len, MPI_BYTE, buf, counts, displs, MPI_BYTE, comm);
    free(counts);
    free(displs);
    *all = buf;
    return fits ? 0 : 1;
}

static mr_status shared_run(mr_fitter *fitter, const char *const *data, size_t ndata, mr_fit **out, void *user)
{
    mr_fitter_set_share(fitter, user);
    return mr_fitter_run_set(fitter, data, ndata, out);
}

static void silence(void)
{
    if (freopen("/dev/null", "w", stdout) == NULL || freopen("/dev/null", "w", stderr) == NULL) return;
}

/* The command on this rank, then the exit code all agree on: a failure
 * that no exchange carried yet (before the fit, or rank 0's JSON) is
 * carried now, and the lowest failing rank's wins. */
static int run(int argc, char **argv, mr_share *share)
{
    cli_fit_hooks hooks;
    char msg[1024];
    int rc, agreed;
    memset(&hooks, 0, sizeof hooks);
    hooks.run = shared_run;
    hooks.user = share;
    hooks.no_outputs = mr_share_rank(share) != 0;
    hooks.share_note = " (this process's share)";
    if (argc < 2 || strcmp(argv[1], "fit") != 0)
        rc = cli_usage_error("millrace-mpi runs one command: mpirun -np N millrace-mpi fit [options] DATA...");
    else rc = cmd_fit(argc - 1, argv + 1, &hooks);
    agreed = (int)mr_share_close(share, (mr_status)rc, rc != 0 ? cli_last_error() : NULL, msg, sizeof msg);
    /* another rank's failure, which only rank 0 can tell */
    if (agreed != rc && agreed != 0 && msg[0]) fprintf(stderr, "millrace: %s\n", msg);
    return agreed;
}

int main(int argc, char **argv)
{
    MPI_Comm comm;
    mr_share *share = NULL;
    int rank = 0, nranks = 1, rc;
    if (MPI_Init(&argc, &argv) != MPI_SUCCESS) {
        fprintf(stderr, "millrace: MPI did not start\n");
        return (int)MR_ERR_IO;
    }
    MPI_Comm_dup(MPI_COMM_WORLD, &comm);
    MPI_Comm_rank(comm, &rank);
    MPI_Comm_size(comm, &nranks);
    if (rank != 0) silence();
    cli_keep_memory_flat();
    cli_clean_up_on_signals();
    if (mr_share_new(rank, nranks, gather, &comm, &share) != MR_OK) abort_all(comm);
    rc = run(argc, argv, share);
    mr_share_free(share);
    MPI_Comm_free(&comm);
    MPI_Finalize();
    return cli_close_stdout(rc);
}
