/* units.c: the study runner (see ringup/units.h).
 *
 * Workers and remote takers draw the next unit index from one counter under a
 * mutex local to the call; records are accepted under the same mutex, so accept
 * runs one at a time. A unit is handed out once; after the stop flag or the first
 * study error nothing more is handed out, and the call returns when every unit in
 * flight (local or remote) has come back. */
#include "ringup/units.h"

#include <pthread.h>
#include <stdlib.h>
#include <string.h>

struct ru_units {
    const ru_units_job *job;
    pthread_mutex_t lock;  /* guards everything below */
    size_t next;           /* next index to consider */
    size_t done;           /* records accepted */
    ru_status status;      /* first study error (RU_OK none) */
    ru_error err;          /* its message */
    int stopped;           /* the stop flag was seen */
};

int ru_units_in_shard(size_t i, unsigned shard_k, unsigned shard_n)
{
    return shard_n <= 1 || i % shard_n == (size_t)(shard_k - 1);
}

static int take_locked(ru_units *u, size_t *i)
{
    const ru_units_job *j = u->job;
    if (u->status != RU_OK)
        return 0;
    if (j->stop && *j->stop) {
        u->stopped = 1;
        return 0;
    }
    while (u->next < j->count) {
        size_t k = u->next++;
        if ((j->skip && j->skip[k]) || !ru_units_in_shard(k, j->shard_k, j->shard_n))
            continue;
        *i = k;
        return 1;
    }
    return 0;
}

int ru_units_take(ru_units *u, size_t *i)
{
    pthread_mutex_lock(&u->lock);
    int ok = take_locked(u, i);
    pthread_mutex_unlock(&u->lock);
    return ok;
}

static void fail_locked(ru_units *u, ru_status s, const ru_error *e, size_t i)
{
    if (u->status != RU_OK)
        return;
    u->status = s;
    u->err = *e;
    if (!u->err.msg[0])
        ru_error_set(&u->err, s, NULL, 0, 0, "unit %zu: %s", i, ru_status_str(s));
}

static void give_locked(ru_units *u, size_t i, const char *line)
{
    if (!line || u->status != RU_OK)
        return; /* not done (stopped there), or the study already failed */
    ru_error e;
    ru_error_clear(&e);
    ru_status s = u->job->accept(u->job->ctx, i, line, &e);
    if (s != RU_OK)
        fail_locked(u, s, &e, i);
    else
        u->done++;
}

void ru_units_give(ru_units *u, size_t i, const char *line)
{
    pthread_mutex_lock(&u->lock);
    give_locked(u, i, line);
    pthread_mutex_unlock(&u->lock);
}

static void *worker(void *arg)
{
    ru_units *u = arg;
    size_t i;
    while (ru_units_take(u, &i)) {
        char *line = NULL;
        ru_error e;
        ru_error_clear(&e);
        ru_status s = u->job->run(u->job->ctx, i, &line, &e);
        pthread_mutex_lock(&u->lock);
        if (s == RU_OK)
            give_locked(u, i, line);
        else if (s == RU_ESTOPPED)
            u->stopped = 1;
        else
            fail_locked(u, s, &e, i);
        pthread_mutex_unlock(&u->lock);
        free(line);
    }
    return NULL;
}

static size_t count_todo(const ru_units_job *j)
{
    size_t n = 0;
    for (size_t i = 0; i < j->count; i++)
        n += (!j->skip || !j->skip[i]) && ru_units_in_shard(i, j->shard_k, j->shard_n);
    return n;
}

ru_status ru_units_run(const ru_units_job *job, ru_units_summary *summary, ru_error *err)
{
    ru_units u;
    memset(&u, 0, sizeof u);
    u.job = job;
    size_t todo = count_todo(job);
    if (summary)
        *summary = (ru_units_summary){.todo = todo};
    if (pthread_mutex_init(&u.lock, NULL) != 0)
        return ru_error_set(err, RU_ENOMEM, NULL, 0, 0, "cannot set up the study's lock");
    int threads = job->threads > 0 ? job->threads : ru_batch_cpu_count();
    if ((size_t)threads > todo)
        threads = todo ? (int)todo : 1;
    pthread_t *tid = malloc((size_t)threads * sizeof *tid);
    int started = 0;
    for (int t = 0; tid && t < threads; t++) {
        if (pthread_create(&tid[t], NULL, worker, &u) != 0)
            break;
        started++;
    }
    if (job->serve)
        job->serve(job->sctx, &u);
    if (started == 0)
        worker(&u); /* no thread could start: the units run here */
    for (int t = 0; t < started; t++)
        pthread_join(tid[t], NULL);
    free(tid);
    pthread_mutex_destroy(&u.lock);
    if (job->stop && *job->stop && u.done < todo)
        u.stopped = 1;
    if (summary) {
        summary->done = u.done;
        summary->stopped = u.stopped && u.status == RU_OK;
    }
    if (u.status != RU_OK) {
        if (err)
            *err = u.err;
        return u.status;
    }
    return RU_OK;
}
