/* mpi.c: a batch study over MPI ranks (`mpirun -n K ringup montecarlo ...`).
 *
 * Rank 0 does everything a single process does (the log, the report) and runs
 * units on its own threads; its main thread meanwhile serves the other ranks one
 * unit at a time (dynamic load balancing: a rank asks for the next unit when it
 * has sent its last record), polling with a short sleep so that waiting costs no
 * processor. A record travels as its JSON line, and the report is built from the
 * records alone, so rank 0 writes what one process writes, bit for bit.
 * Messages: a rank sends READY (nothing), RESULT (index, record) or NOTDONE
 * (index); rank 0 answers each with WORK (index) or STOP.
 *
 * MPI starts only when the process was launched by mpirun (its environment says
 * so), never for a plain run. Built without MPI (RU_HAVE_MPI unset), a launch
 * under mpirun with more than one rank is refused, since every rank would run the
 * whole study. */
#include "cli/cli.h"

#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

/* The number of ranks mpirun says it started (0: not under mpirun). */
static int launched_ranks(void)
{
    const char *v = getenv("OMPI_COMM_WORLD_SIZE");
    if (!v)
        v = getenv("PMI_SIZE");
    return v ? atoi(v) : 0;
}

#ifndef RU_HAVE_MPI

int cli_mpi_start(int *rank, int *size)
{
    *rank = 0;
    *size = 1;
    if (launched_ranks() > 1) {
        fprintf(stderr, "ringup: this build has no MPI (configure with libopenmpi-dev "
                        "installed, -DRU_MPI=ON): under mpirun every rank would run the "
                        "whole study\n");
        return 1;
    }
    return 0;
}

void cli_mpi_end(void) {}
int cli_mpi_all_ok(int ok) { return ok; }
int cli_mpi_bcast_argv(int *argc, char ***argv, int *rc)
{
    (void)argc;
    (void)argv;
    (void)rc;
    return 0;
}
void cli_mpi_serve(void *unused, ru_units *u)
{
    (void)unused;
    (void)u;
}
int cli_mpi_work(cli_study *s)
{
    (void)s;
    return 0;
}

#else

#include <mpi.h>
#include <time.h>

enum { TAG_READY = 1, TAG_RESULT, TAG_NOTDONE, TAG_WORK, TAG_STOP };

static int mpi_on; /* MPI_Init was called by this process */

int cli_mpi_start(int *rank, int *size)
{
    *rank = 0;
    *size = 1;
    if (launched_ranks() < 1)
        return 0;
    int provided;
    if (MPI_Init_thread(NULL, NULL, MPI_THREAD_FUNNELED, &provided) != MPI_SUCCESS) {
        fprintf(stderr, "ringup: MPI did not start\n");
        return 2;
    }
    mpi_on = 1;
    MPI_Comm_rank(MPI_COMM_WORLD, rank);
    MPI_Comm_size(MPI_COMM_WORLD, size);
    if (provided < MPI_THREAD_FUNNELED && *size > 1) {
        if (*rank == 0)
            fprintf(stderr, "ringup: this MPI cannot be used beside threads\n");
        return 2;
    }
    return 0;
}

void cli_mpi_end(void)
{
    if (mpi_on)
        MPI_Finalize();
    mpi_on = 0;
}

int cli_mpi_all_ok(int ok)
{
    int all = ok;
    if (mpi_on)
        MPI_Allreduce(&ok, &all, 1, MPI_INT, MPI_MIN, MPI_COMM_WORLD);
    return all;
}

/* Rank 0's status and, when 0, its argument vector, to every rank. */
int cli_mpi_bcast_argv(int *argc, char ***argv, int *rc)
{
    int rank;
    MPI_Comm_rank(MPI_COMM_WORLD, &rank);
    int head[2] = {*rc, *argc};
    MPI_Bcast(head, 2, MPI_INT, 0, MPI_COMM_WORLD);
    *rc = head[0];
    if (*rc != 0)
        return 0;
    if (rank != 0) {
        *argc = head[1];
        *argv = calloc((size_t)*argc + 1, sizeof **argv);
    }
    for (int i = 0; i < head[1]; i++) {
        int len = rank == 0 ? (int)strlen((*argv)[i]) + 1 : 0;
        MPI_Bcast(&len, 1, MPI_INT, 0, MPI_COMM_WORLD);
        char *buf = rank == 0 ? (*argv)[i] : malloc((size_t)len);
        if (!buf)
            MPI_Abort(MPI_COMM_WORLD, 2);
        MPI_Bcast(buf, len, MPI_CHAR, 0, MPI_COMM_WORLD);
        if (rank != 0)
            (*argv)[i] = buf;
    }
    return 0;
}

static void send_index(int tag, int dest, size_t i)
{
    uint64_t v = (uint64_t)i;
    MPI_Send(&v, (int)sizeof v, MPI_BYTE, dest, tag, MPI_COMM_WORLD);
}

void cli_mpi_serve(void *unused, ru_units *u)
{
    (void)unused;
    int size;
    MPI_Comm_size(MPI_COMM_WORLD, &size);
    int active = size - 1;
    char *buf = NULL;
    size_t cap = 0;
    while (active > 0) {
        int flag = 0;
        MPI_Status st;
        MPI_Iprobe(MPI_ANY_SOURCE, MPI_ANY_TAG, MPI_COMM_WORLD, &flag, &st);
        if (!flag) {
            struct timespec pause = {0, 1000000}; /* 1 ms: waiting costs no processor */
            nanosleep(&pause, NULL);
            continue;
        }
        int n;
        MPI_Get_count(&st, MPI_BYTE, &n);
        if ((size_t)n + 1 > cap) {
            free(buf);
            cap = (size_t)n + 1;
            if (!(buf = malloc(cap)))
                MPI_Abort(MPI_COMM_WORLD, 2);
        }
        MPI_Recv(buf, n, MPI_BYTE, st.MPI_SOURCE, st.MPI_TAG, MPI_COMM_WORLD,
                 MPI_STATUS_IGNORE);
        buf[n] = '\0';
        uint64_t idx = 0;
        if (st.MPI_TAG != TAG_READY && n >= (int)sizeof idx)
            memcpy(&idx, buf, sizeof idx);
        if (st.MPI_TAG == TAG_RESULT)
            ru_units_give(u, (size_t)idx, buf + sizeof idx);
        else if (st.MPI_TAG == TAG_NOTDONE)
            ru_units_give(u, (size_t)idx, NULL);
        size_t next;
        if (ru_units_take(u, &next)) {
            send_index(TAG_WORK, st.MPI_SOURCE, next);
        } else {
            MPI_Send(NULL, 0, MPI_BYTE, st.MPI_SOURCE, TAG_STOP, MPI_COMM_WORLD);
            active--;
        }
    }
    free(buf);
}

int cli_mpi_work(cli_study *s)
{
    int rc = 0;
    MPI_Send(NULL, 0, MPI_BYTE, 0, TAG_READY, MPI_COMM_WORLD);
    for (;;) {
        uint64_t idx;
        MPI_Status st;
        MPI_Recv(&idx, (int)sizeof idx, MPI_BYTE, 0, MPI_ANY_TAG, MPI_COMM_WORLD, &st);
        if (st.MPI_TAG == TAG_STOP)
            break;
        char *line = NULL;
        ru_error err;
        ru_error_clear(&err);
        ru_status rs = s->run(s->ctx, (size_t)idx, &line, &err);
        if (rs == RU_OK) {
            size_t len = strlen(line);
            char *msg = malloc(sizeof idx + len);
            if (!msg)
                MPI_Abort(MPI_COMM_WORLD, 2);
            memcpy(msg, &idx, sizeof idx);
            memcpy(msg + sizeof idx, line, len);
            MPI_Send(msg, (int)(sizeof idx + len), MPI_BYTE, 0, TAG_RESULT, MPI_COMM_WORLD);
            free(msg);
        } else {
            if (rs != RU_ESTOPPED)
                rc = cli_fail(&err);
            send_index(TAG_NOTDONE, 0, (size_t)idx);
        }
        free(line);
    }
    return rc;
}

#endif
