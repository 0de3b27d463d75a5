#ifndef SALTUS_GRID_H
#define SALTUS_GRID_H

/* The grid runtime of generated C and CUDA code (docs/network-step.md, docs/codegen.md): a
 * network of model populations simulated on a time grid with events inside steps, and the
 * exact gradient of that simulation. The algorithm is Saltus's own grid simulator
 * (server/src/grid/forward.ts, backward.ts), trial by trial; models plug in through a
 * saltus_model table of kernels (one per generated model file). Everything is SI.
 *
 * The same text compiles as C99 (saltus_grid.c) and as CUDA C++ (saltus_grid.cu), where the
 * per-trial functions are __host__ __device__ and a thread runs one trial. */

#include <stddef.h>

@SALTUS_PRECISION@

#if defined(__CUDACC__)
#define SALTUS_HD __host__ __device__
/* kept out of line on the device: inlining every kernel at every call multiplies compile time */
#define SALTUS_NOINLINE __noinline__
#else
#define SALTUS_HD
#define SALTUS_NOINLINE
#endif

#define SALTUS_EXP SALTUS_MATH(exp)
#define SALTUS_EXPM1 SALTUS_MATH(expm1)
#define SALTUS_LOG SALTUS_MATH(log)
#define SALTUS_FABS SALTUS_MATH(fabs)
#define SALTUS_SQRT SALTUS_MATH(sqrt)
#define SALTUS_LDEXP SALTUS_MATH(ldexp)

/* Largest number of nodes of a divided difference of exp (saltus_expdd). */
#define SALTUS_EXPDD_MAX 16
/* Most sub-steps of the step map per grid step (step/substeps.ts). */
#define SALTUS_MAX_SUBSTEPS 64
#define SALTUS_SUBSTEP_RATE_BOUND 0.2

/* Kernels of one model (docs/codegen.md, "Kernels"): x are the states of one neuron, p its
 * parameters, lam a costate, dx a tangent; every output array is filled in this order and
 * must not alias an input:
 *   map_step      out[S]: F(x, p, t, dt), the step map over [t, t + dt]
 *   map_jvp       out[4S]: F, dF/dx . dx, dF/d dt, dF/dt
 *   map_vjp       out[S + 2 + G]: (dF/dx)^T lam, lam . dF/d dt, lam . dF/dt, lam . dF/dp (gradient parameters)
 *   flow          out[S]: f(x, p, t)
 *   guard         returns g(x, p, t)
 *   guard_grad    out[S + 1 + G]: dg/dx, dg/dt, dg/dp
 *   spike_jump    out[S]: the state after the spike jump
 *   spike_vjp     out[S + 1 + G]: (dJ/dx)^T lam, lam . dJ/dt, lam . dJ/dp
 *   incoming_jump out[S]: the state after an incoming spike of weight w
 *   incoming_vjp  out[S + 2 + G]: (dJ/dx)^T lam, lam . dJ/dt, lam . dJ/dp, lam . dJ/dw
 * A model without a fire (incoming) block has NULL spike (incoming) kernels. A model with several
 * incoming blocks (receptors) lists each block's pair in incoming_jumps/incoming_vjps (block 0 is
 * incoming_jump/incoming_vjp), with the blocks' weight names in incoming_names.
 * A model with a quiet period (`quiet for D`, has_quiet) also has its quiet mode's map kernels
 * quiet_map_step, quiet_map_jvp, quiet_map_vjp, quiet_flow (the same outputs) and
 *   quiet_duration out[1 + G]: D, dD/dp (gradient parameters)
 * with the quiet map's facts (quiet_exact, quiet_state_dependent, quiet_rate); NULL otherwise. */
typedef struct saltus_model {
    const char *name;                  /* as declared in the model file */
    int id;                            /* position in the generated set (CUDA dispatch) */
    int n_states, n_params, n_grad;    /* S, P, G */
    const char *const *state_names;    /* declared names, in declaration order */
    const char *const *param_names;
    const int *grad_params;            /* indices (into the parameters) of the G gradient parameters */
    const saltus_real *default_params; /* the model's values (SI) */
    const saltus_real *initial;        /* declared initial states (SI) */
    int exact;                         /* the map is the exact flow */
    int state_dependent;               /* the map's derivatives read the segment-start state */
    int has_guard, direction;          /* direction: 1 up, -1 down, 0 either */
    int has_incoming;                  /* the number of incoming blocks (0: none) */
    double rate;                       /* the sub-step rule's rate (1/s; 0 for an exact map) */
    void (*map_step)(const saltus_real *x, const saltus_real *p, saltus_real t, saltus_real dt, saltus_real *out);
    void (*map_jvp)(const saltus_real *x, const saltus_real *p, saltus_real t, saltus_real dt, const saltus_real *dx, saltus_real *out);
    void (*map_vjp)(const saltus_real *x, const saltus_real *p, saltus_real t, saltus_real dt, const saltus_real *lam, saltus_real *out);
    void (*flow)(const saltus_real *x, const saltus_real *p, saltus_real t, saltus_real *out);
    saltus_real (*guard)(const saltus_real *x, const saltus_real *p, saltus_real t);
    void (*guard_grad)(const saltus_real *x, const saltus_real *p, saltus_real t, saltus_real *out);
    void (*spike_jump)(const saltus_real *x, const saltus_real *p, saltus_real t, saltus_real *out);
    void (*spike_vjp)(const saltus_real *x, const saltus_real *p, saltus_real t, const saltus_real *lam, saltus_real *out);
    void (*incoming_jump)(const saltus_real *x, const saltus_real *p, saltus_real t, saltus_real w, saltus_real *out);
    void (*incoming_vjp)(const saltus_real *x, const saltus_real *p, saltus_real t, saltus_real w, const saltus_real *lam, saltus_real *out);
    const char *const *incoming_names; /* the blocks' weight names, as declared (a projection's "via") */
    void (*const *incoming_jumps)(const saltus_real *x, const saltus_real *p, saltus_real t, saltus_real w, saltus_real *out);
    void (*const *incoming_vjps)(const saltus_real *x, const saltus_real *p, saltus_real t, saltus_real w, const saltus_real *lam, saltus_real *out);
    int has_quiet, quiet_exact, quiet_state_dependent;
    double quiet_rate;
    void (*quiet_map_step)(const saltus_real *x, const saltus_real *p, saltus_real t, saltus_real dt, saltus_real *out);
    void (*quiet_map_jvp)(const saltus_real *x, const saltus_real *p, saltus_real t, saltus_real dt, const saltus_real *dx, saltus_real *out);
    void (*quiet_map_vjp)(const saltus_real *x, const saltus_real *p, saltus_real t, saltus_real dt, const saltus_real *lam, saltus_real *out);
    void (*quiet_flow)(const saltus_real *x, const saltus_real *p, saltus_real t, saltus_real *out);
    void (*quiet_duration)(const saltus_real *p, saltus_real *out);
} saltus_model;

/* How the runtime calls a kernel (the CUDA file replaces it by a dispatch on the model's id). */
#ifndef SALTUS_CALL
#define SALTUS_CALL(m, kernel, ...) ((m)->kernel(__VA_ARGS__))
#endif
/* An incoming block's kernel (kernel: jump or vjp) by the block's index r. */
#ifndef SALTUS_CALL_IN
#define SALTUS_CALL_IN(m, r, kernel, ...) ((m)->incoming_##kernel##s[r](__VA_ARGS__))
#endif

/* ---- the network (docs/network-step.md, "Network description"); all values SI ---- */

enum {
    SALTUS_LOSS_STATE_INTEGRAL = 1, /* sum_i int (X_i - target_i)^2 / 2 dt */
    SALTUS_LOSS_SPIKE_TIME,         /* sum over neurons that fire of (t_first_i - target_i)^2 / 2 */
    SALTUS_LOSS_CE_INTEGRAL,        /* cross-entropy of softmax(int X_i dt) at the label */
    SALTUS_LOSS_CE_MAX,             /* ... of softmax(largest grid value of X_i) */
    SALTUS_LOSS_CE_FIRST_SPIKE      /* ... of softmax(-t_first_i / tau), t_first = duration when silent */
};

typedef struct {
    const char *name;
    int size;
    const saltus_model *model;  /* NULL: an input population */
    const saltus_real *params;  /* the model's n_params values */
    const saltus_real *initial; /* the model's n_states initial values (every neuron) */
} saltus_population;

typedef struct {
    int from, to;               /* population indices */
    const saltus_real *weights; /* weights[to][from], size(to) rows of size(from), row-major */
    int receptor;               /* the receiving incoming block (its index in the model; 0: the first) */
    const saltus_real *delays;  /* transmission delays delays[to][from] (s, >= 0), shaped like weights; NULL: none
                                   (a spike of j at s reaches neuron i at s + delays[i][j]; docs/network-step.md) */
} saltus_projection;

typedef struct {
    int n_inputs;               /* input spikes of this trial, each (population, time, index), */
    const int *input_pop;       /* listed population by population in the description's order */
    const saltus_real *input_time;
    const int *input_index;
    int label;                  /* the class (classification losses) */
} saltus_trial;

typedef struct {
    int kind;                   /* SALTUS_LOSS_... */
    int population;
    int state;                  /* the state of the state losses, else -1 */
    const saltus_real *target;  /* state-integral: per neuron; spike-time: per neuron (s) */
    saltus_real tau;            /* ce-first-spike (s) */
} saltus_loss;

typedef struct {
    saltus_real duration;
    int n_populations;
    const saltus_population *populations;
    int n_projections;
    const saltus_projection *projections;
    int n_trials;
    const saltus_trial *trials;
    saltus_loss loss;
} saltus_network;

/* ---- what a run needs: the plan (from the network and dt) and one workspace per trial ---- */

typedef struct {
    int S, n, G, m;             /* states, neurons, gradient parameters, sub-steps (0 for an input) */
    int needs_starts;           /* the backward pass reads segment-start states: keep grid checkpoints */
    size_t x_off;               /* this population's states in the trial's state arrays (n * S) */
    int n_off;                  /* its neurons in the per-neuron arrays */
    size_t ck_off;              /* its place in one step's checkpoint block */
    int g_off;                  /* its gradient parameters in the gradient array */
    int mq;                     /* sub-steps of the quiet mode's map */
    saltus_real qdur;           /* the quiet period after each spike (s; 0: none) */
} saltus_pop_plan;

typedef struct {
    double dt;
    int steps;
    int n_populations;
    saltus_pop_plan *pops;
    size_t *w_off;              /* each projection's weights in the weight-gradient array */
    size_t x_total, w_total, ck_stride;
    int n_total, g_total, max_S, max_G, n_loss, n_grid, integral;
    long max_spikes;
} saltus_plan;

typedef struct {
    int kind;                   /* 0 arrival, 1 spike, 2 the end of a quiet period (neuron, start; cause: the spike that started it) */
    int step, pop;
    int projection, source, cause; /* arrivals: the projection, the sender, the spike event that caused it (-1: input) */
    int neuron, first, start;   /* spikes: the neuron, its first spike, where its segment started (-1: the grid point) */
    saltus_real time;
    size_t x_at;                /* the state just before (arrival: the whole population), in xbuf */
    size_t s_at;                /* arrival of a population that keeps starts: each neuron's segment start, in sbuf */
    int by_jump;                /* spikes: -2 located on the flow; else fired by a jump (docs/language.md), at the
                                   instant of this arrival event (-1: the initial state at t = 0) */
    int targeted;               /* arrivals of a projection with delays: only the neurons i (i != source on a
                                   population's projection onto itself) with delays[i][source] == delay receive it */
    saltus_real delay;
    size_t tn_at;               /* targeted arrivals: their per-neuron time sensitivities (the delay gradients), in Tn */
} saltus_event;

typedef struct {
    saltus_real time;
    long seq;
    int projection, source, cause;
    int targeted;               /* as in saltus_event */
    saltus_real delay;
} saltus_pending;

enum {
    SALTUS_OK = 0,
    SALTUS_E_FIRED_SIDE,        /* a spike jump left the neuron on the fired side of its threshold */
    SALTUS_E_SPIKES,            /* more than max_spikes spikes in the trial */
    SALTUS_E_NOT_FINITE,        /* a state is not finite at a grid point */
    SALTUS_E_LOSS,              /* the trial's loss is not finite */
    SALTUS_E_CAPACITY,          /* a fixed-capacity workspace (CUDA) is full: enlarge and run again */
    SALTUS_E_MEMORY,            /* out of memory */
    SALTUS_E_JUMP_LOOP          /* a neuron carried across its threshold twice at one instant (a loop of spikes fired by jumps) */
};

typedef struct {
    /* growable parts (fixed capacity where growable is 0, as on a GPU) */
    int growable;
    saltus_event *events;   size_t n_events, cap_events;
    saltus_real *xbuf;      size_t n_xbuf, cap_xbuf;
    int *sbuf;              size_t n_sbuf, cap_sbuf;
    saltus_pending *queue;  size_t n_queue, cap_queue;
    saltus_real *T;         size_t cap_T;          /* dL/d(time) per event (backward) */
    saltus_real *Tn;        size_t n_tn, cap_Tn;   /* dL/d(time) per targeted arrival and receiving neuron (backward) */
    /* fixed parts, sized by the plan */
    saltus_real *x, *tau, *lam, *cur;
    int *start, *fired, *argmax;
    saltus_real *checkpoints;                      /* steps x ck_stride */
    saltus_real *grid_values;                      /* (steps + 1) x n_loss (ce-max) */
    saltus_real *loss_values, *loss_coef, *grad;
    saltus_real *scratch;
    /* spikes fired by jumps at the current instant `inst`: each neuron's guard at its start (NaN:
       not touched), flags (2 fired there, 4 on the fired side at t = 0), each population's last arrival */
    saltus_real *jref, inst;
    int *jflag, *jlast;
    int *jlastn;                                   /* each neuron's last targeted arrival at the instant (delays) */
    /* quiet periods: each neuron's end of its current one (infinity: not quiet), the spike event
       that started it, and (backward) its mode over the segment being walked */
    saltus_real *qend;
    int *qcause, *qmode;
    /* results */
    saltus_real loss, integral;
    long seq, spike_count;
    int status, err_pop, err_neuron, err_state;
    saltus_real err_time;
} saltus_trial_ws;

/* Divided differences of exp (server/src/symbolic/expdd.ts): phi1(z) = (e^z - 1)/z and e[x0..x(n-1)]. */
SALTUS_HD saltus_real saltus_phi1(saltus_real z);
SALTUS_HD saltus_real saltus_expdd(int n, const saltus_real *x);

/* Checks the network and dt, and sizes everything (0, or -1 with a message naming the field). */
int saltus_plan_make(const saltus_network *net, double dt, long max_spikes, double max_bytes, saltus_plan *plan, char *err, size_t cap);
void saltus_plan_free(saltus_plan *plan);
/* Sizes of the fixed parts of one trial's workspace (in saltus_real and int units). */
size_t saltus_ws_reals(const saltus_plan *plan);
size_t saltus_ws_ints(const saltus_plan *plan);
/* A growable workspace on the heap (0, or SALTUS_E_MEMORY). */
int saltus_ws_init(saltus_trial_ws *ws, const saltus_plan *plan);
void saltus_ws_free(saltus_trial_ws *ws);
/* Points the fixed parts of ws into reals[saltus_ws_reals] and ints[saltus_ws_ints]. */
SALTUS_HD void saltus_ws_attach(saltus_trial_ws *ws, const saltus_plan *plan, saltus_real *reals, int *ints);

/* One trial forward (the event log, spikes and loss in ws) and backward (gW, gP accumulate
 * dL/dW per projection and dL/dp per population and gradient parameter; gD, when not NULL, dL/d(delay)
 * per projection, laid out like gW, 0 for a projection without delays). SALTUS_OK or an error code. */
SALTUS_HD int saltus_trial_forward(const saltus_network *net, const saltus_plan *plan, int trial, saltus_trial_ws *ws);
SALTUS_HD int saltus_trial_backward(const saltus_network *net, const saltus_plan *plan, int trial, saltus_trial_ws *ws,
                                    saltus_real *gW, saltus_real *gP, saltus_real *gD);
/* The message of a trial's error. */
void saltus_trial_message(const saltus_network *net, const saltus_trial_ws *ws, const saltus_plan *plan, char *buf, size_t cap);

/* Every trial forward and backward on the host. */
typedef struct {
    saltus_plan plan;
    int n_trials;
    saltus_trial_ws *trials;
    saltus_real loss;           /* the sum over trials */
    saltus_real *gW;            /* plan.w_total: dL/dW, projection by projection, weights[to][from] */
    saltus_real *gP;            /* plan.g_total: dL/dp, population by population, gradient parameters in model order */
    saltus_real *gD;            /* plan.w_total: dL/d(delay), laid out like gW */
} saltus_result;

int saltus_run(const saltus_network *net, double dt, long max_spikes, saltus_result *out, char *err, size_t cap);
void saltus_result_free(saltus_result *r);

#endif /* SALTUS_GRID_H */
