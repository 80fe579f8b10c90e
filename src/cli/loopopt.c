/* loopopt.c: the loop-gain options shared by `poles` and `run` (--loop PART,
 * --loop-node NODE, --loop-load PARTS) and how a loop is named in text and JSON. */
#include "cli/cli.h"

#include "ringup/smallsig.h"

#include <stdio.h>
#include <string.h>

int cli_loop_get(const cli_opt *opts, cli_loop_opts *lo)
{
    lo->part = cli_get(opts, "loop");
    lo->node = cli_get(opts, "loop-node");
    lo->load = cli_get(opts, "loop-load");
    if (lo->part && lo->node) {
        fprintf(stderr, "ringup: give --loop (an amplifier) or --loop-node (a node), "
                        "not both\n");
        return 1;
    }
    if (lo->load && !lo->node) {
        fprintf(stderr, "ringup: --loop-load names the far side of a --loop-node break; "
                        "give --loop-node too\n");
        return 1;
    }
    if (lo->load && !lo->load[0]) {
        fprintf(stderr, "ringup: --loop-load needs part names (comma-separated)\n");
        return 1;
    }
    return 0;
}

void cli_loop_title(const struct ru_loop *l, char *buf, size_t size)
{
    if (ru_loop_node(l)[0])
        snprintf(buf, size, "loop gain at node %s (load side: %s; double injection)",
                 ru_loop_node(l), ru_loop_load(l));
    else
        snprintf(buf, size, "loop gain of %s", ru_loop_label(l));
}

void cli_loop_json_id(ru_json *j, const struct ru_loop *l)
{
    if (!ru_loop_node(l)[0]) {
        ru_json_string(j, "part", ru_loop_label(l));
        return;
    }
    ru_json_string(j, "node", ru_loop_node(l));
    ru_json_string(j, "load_side", ru_loop_load(l));
    ru_json_string(j, "method", "Middlebrook double injection");
}
