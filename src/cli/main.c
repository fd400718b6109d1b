/* main.c - the millrace command: a thin client of the library.  It picks
 * the command (one cmd_*.c file each, sharing cli.c) and makes what went
 * to standard output count.  Exit codes are the library's status values
 * (see millrace.h and the README). */
#include <stdio.h>
#include <string.h>

#include "cli.h"

static int dispatch(int argc, char **argv)
{
    if (argc < 2 || strcmp(argv[1], "help") == 0 || strcmp(argv[1], "--help") == 0) {
        fputs(cli_usage_text, argc < 2 ? stderr : stdout);
        return argc < 2 ? (int)MR_ERR_USAGE : 0;
    }
    if (strcmp(argv[1], "version") == 0 || strcmp(argv[1], "--version") == 0) {
        printf("millrace %s\n", mr_version());
        return 0;
    }
    if (strcmp(argv[1], "show") == 0) return cmd_show(argc - 1, argv + 1);
    if (strcmp(argv[1], "drift") == 0) return cmd_drift(argc - 1, argv + 1);
    if (strcmp(argv[1], "report") == 0) return cmd_report(argc - 1, argv + 1);
    if (strcmp(argv[1], "score") == 0) return cmd_score(argc - 1, argv + 1);
    if (strcmp(argv[1], "survey") == 0) return cmd_survey(argc - 1, argv + 1);
    if (strcmp(argv[1], "compare") == 0) return cmd_compare(argc - 1, argv + 1);
    if (strcmp(argv[1], "fit") != 0) return cli_usage_error("unknown command (try 'millrace fit')");
    return cmd_fit(argc - 1, argv + 1, NULL);
}

int main(int argc, char **argv)
{
    cli_keep_memory_flat();
    cli_clean_up_on_signals();
    return cli_close_stdout(dispatch(argc, argv));
}
