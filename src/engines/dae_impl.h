/* dae_impl.h: the IDA integrator's run record (private to dae.c, the step loop and
 * samples, and dae_setup.c, the variables, callbacks, Newton matrix pattern,
 * solver setup and consistent starts). See dae.c for what the variables are. */
#ifndef RINGUP_DAE_IMPL_H
#define RINGUP_DAE_IMPL_H

#include "engines/transient_impl.h"

#include <ida/ida.h>
#include <nvector/nvector_serial.h>
#include <sundials/sundials_context.h>
#include <sundials/sundials_linearsolver.h>
#include <sundials/sundials_matrix.h>

struct ru_dae {
    const ru_system *sys;
    ru_transient_opts opts;    /* a copy of the caller's options */
    const ru_transient_opts *o; /* = &opts */
    ru_sample_fn fn;           /* the sink */
    void *user;
    double busy_s;             /* wall time spent in create and advance */
    size_t n;                  /* states = variables */
    int klu;                   /* 1: KLU, 0: dense */
    double rtol, atol_rel;     /* the options' tolerances times ida_tol_factor */
    SUNContext ctx;
    void *ida;
    N_Vector yy, yp;           /* solution and its rate at the return time */
    N_Vector ys, atol, id;     /* sample, absolute tolerances, 1 differential / 0 algebraic */
    SUNMatrix A;
    SUNLinearSolver LS;
    ru_sparsity pat;           /* the system's pattern of dr/dx and M */
    int *ref;                  /* per variable: a group member's reference, else -1 */
    int *members;              /* variables with ref >= 0 */
    size_t nmem;
    double *x, *xp, *r;        /* n each: states, their rates, residual (callbacks) */
    double *xs;                /* n: a sample as node voltages */
    double *yref;              /* n: the options' x_ref as variables (0 without) */
    int in_ic;                 /* 1 while IDACalcIC runs (dae_setup.c's weights) */
    double *drv;               /* nnz: dr/dx over the pattern */
    long jnnz;                 /* entries of the Newton matrix (C S pattern) */
    sunindextype *jcol, *jrow; /* its compressed columns (n + 1, jnnz) */
    long *map1, *map2;         /* per pattern entry: its place in column j, and for a
                                  member's column also in its reference's (-1 none) */
    double *bp;                /* breakpoints in (0, t_final], sorted */
    size_t nbp;
    double bp_local[RU_TR_BP_LOCAL];
    long k, k_last;            /* next sample index, last sample index */
    long k_stop;               /* the current advance delivers samples up to this */
    size_t ibp;                /* next breakpoint */
    int pending_bp;            /* the last step stopped at bp[ibp], jump not applied */
    int at_end;                /* the solver reached t_final */
    int done;                  /* every sample up to k_last delivered */
    double tprev;              /* furthest time reached (stall detection) */
    long stall;                /* steps without progress in t */
    ru_status failed;          /* a failure ends the run: every later call returns it */
    double t_final;            /* integration end: max(stop_s, k_last*sample_s) */
    double eps_t;              /* time resolution for "same instant" (s) */
    long res_evals, jac_evals; /* counted in the callbacks (survive re-inits) */
    long seg_steps, seg_errf, seg_nlf;
    long samples;
    ru_status sys_status;
    char msg[RU_ERROR_TEXT];   /* IDA's last error message */
};
typedef struct ru_dae dae_run;

/* x = S y: node voltages from the integrator's variables. */
void ru_dae_y_to_x(const dae_run *r, const double *y, double *x);

/* The SUNDIALS objects, tolerances, callbacks and the consistent start at t = 0
 * from state x0; ru_dae_run_free releases everything the run holds. */
ru_status ru_dae_setup_solver(dae_run *r, const double *x0, ru_error *err);
void ru_dae_run_free(dae_run *r);

/* Consistent y, y' at t from state x (IDACalcIC; the storage rates a first guess
 * of y'), after IDAReInit when reinit is set; tnext is the next stop time. */
ru_status ru_dae_consistent_start(dae_run *r, double t, const double *x, double tnext,
                                  int reinit, ru_error *err);

#endif
