/* mpi_main.c - millrace-mpi (make mpi), run as `mpirun -np N millrace-mpi
 * fit [options] DATA...`: the fit command (cmd_fit.c) shared by N
 * processes through OpenMPI (mr_share in millrace.h, fit/share.c).  Rank
 * 0 is the command as a user knows it: the report, messages, progress,
 * the JSON and the run log.  The other ranks write nothing (their
 * standard output and error go to /dev/null) and exit with the code every
 * rank agreed on.  Built only by `make mpi`, with mpicc: the plain build
 * needs no MPI. */
#define _POSIX_C_SOURCE 200809L
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

/* The most bytes one broadcast carries: MPI counts are ints.
 * MILLRACE_TEST_MPI_PIECE (tests/cli/mpi.sh) makes it small, so that a
 * test's exchanges go in many pieces. */
static int piece_bytes(void)
{
    const char *v = getenv("MILLRACE_TEST_MPI_PIECE");
    long n = v != NULL ? strtol(v, NULL, 10) : 0;
    return n > 0 && n < (1L << 30) ? (int)n : 1 << 30;
}

/* mr_share_gather_fn over MPI: the lengths, then each rank's bytes
 * broadcast from it in pieces of at most piece_bytes(), straight into
 * their place: an exchange of any size (an allgather's int counts and
 * displacements would stop at 2 GiB in all). */
static int gather(void *user, const void *mine, size_t len, void **all, size_t *lens)
{
    MPI_Comm comm = *(MPI_Comm *)user;
    unsigned long long mine_len = len, *got;
    size_t total = 0, at = 0, off;
    int n, k, rank, piece = piece_bytes();
    char *buf;
    MPI_Comm_size(comm, &n);
    MPI_Comm_rank(comm, &rank);
    if ((got = malloc((size_t)n * sizeof *got)) == NULL) abort_all(comm);
    MPI_Allgather(&mine_len, 1, MPI_UNSIGNED_LONG_LONG, got, 1, MPI_UNSIGNED_LONG_LONG, comm);
    for (k = 0; k < n; k++) total += (size_t)(lens[k] = (size_t)got[k]);
    free(got);
    if ((buf = malloc(total + 1)) == NULL) abort_all(comm);
    for (k = 0; k < n; k++) {
        if (k == rank && len > 0) memcpy(buf + at, mine, len);
        for (off = 0; off < lens[k]; off += (size_t)piece) {
            size_t left = lens[k] - off;
            MPI_Bcast(buf + at + off, left < (size_t)piece ? (int)left : piece, MPI_BYTE, k, comm);
        }
        at += lens[k];
    }
    *all = buf;
    return 0;
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
