#ifndef SALTUS_EPROP_H
#define SALTUS_EPROP_H

/* e-prop in generated C and CUDA code (docs/eprop.md, "Generated code"): a layer of one model
 * without recurrence, fed by input spike trains on the grid, read out by leaky integrators
 * y(t+1) = kappa y(t) + W_out z(t) with the loss E = 1/2 sum_t |y - y*|^2. Online: per synapse
 * the model's derived eligibility vector and its trace filtered by the readout,
 * ebar(t+1) = kappa ebar(t) + e(t); the weight change is sum_t L(t) ebar(t) with the learning
 * signal L = B^T err per neuron and step (B = W_out: the exact dE/dz for this readout, and the
 * symmetric variant; or a fixed random matrix). The same algorithm as the Python runtime's
 * eprop_layer; trials run one after the other and nothing grows with the sequence length.
 * Generated code carries this text inside saltus_grid.h (and saltus_eprop.c's inside
 * saltus_grid.c) when a model of the call has eligibility traces. */

/* The derived e-prop functions of one model (generated in its model file, codegen/c/eprop.ts):
 *   spike   out[2]: z = H(g) and psi = dz/dg on the state at the start of a step
 *   step    out[S]: the state after the spike jump (z = 1) and the flow over dt
 *   arrive  out[S]: the state after one arrival of weight w (NULL: no incoming block)
 *   update  out[S]: eps(t+1) of trained quantity k from eps(t)
 *   trace   out[1]: e(t) of trained quantity k
 * n_q = 0 where the model has no traces (`none` says why). A model with several incoming blocks
 * (receptors) has n_blocks > 1, their weight names and weight quantities, and in place of
 * arrive, update and trace (0 there):
 *   arrive_k  out[S]: the state after one arrival of weight w at block blk
 *   update_k, trace_k: as update and trace, with z_pre and weight one entry per block
 * (z_pre[b]: the arrival at block b in the step; weight[b] its weight). */
typedef struct saltus_eprop_model {
    const saltus_model *model;
    int n_q;
    const int *q_kind;          /* 0 the incoming weight, 1 a parameter */
    const int *q_param;         /* the parameter's index (-1 for the weight) */
    const char *const *q_name;
    const char *none;
    void (*spike)(const saltus_real *x, const saltus_real *p, saltus_real t, saltus_real *out);
    void (*step)(const saltus_real *x, const saltus_real *p, saltus_real t, saltus_real dt, saltus_real z, saltus_real *out);
    void (*arrive)(const saltus_real *x, const saltus_real *p, saltus_real weight, saltus_real *out);
    void (*update)(int k, const saltus_real *x, const saltus_real *p, saltus_real t, saltus_real dt, saltus_real z, saltus_real z_pre,
                   saltus_real psi, saltus_real weight, const saltus_real *eps, saltus_real *out);
    void (*trace)(int k, const saltus_real *x, const saltus_real *p, saltus_real t, saltus_real dt, saltus_real z, saltus_real z_pre,
                  saltus_real psi, saltus_real weight, const saltus_real *eps, saltus_real *out);
    int n_blocks;
    const char *const *block_name;
    const int *block_q;         /* each block's weight quantity */
    void (*arrive_k)(int blk, const saltus_real *x, const saltus_real *p, saltus_real weight, saltus_real *out);
    void (*update_k)(int k, const saltus_real *x, const saltus_real *p, saltus_real t, saltus_real dt, saltus_real z, const saltus_real *z_pre,
                     saltus_real psi, const saltus_real *weight, const saltus_real *eps, saltus_real *out);
    void (*trace_k)(int k, const saltus_real *x, const saltus_real *p, saltus_real t, saltus_real dt, saltus_real z, const saltus_real *z_pre,
                    saltus_real psi, const saltus_real *weight, const saltus_real *eps, saltus_real *out);
} saltus_eprop_model;

/* A layer task; arrays row-major, SI. */
typedef struct {
    int B, T, n_in, N, K;           /* trials, steps, inputs, neurons, readouts */
    const saltus_real *inputs;      /* B x T x n_in, 0 or 1 */
    const saltus_real *win;         /* N x n_in */
    const saltus_real *wout;        /* K x N */
    const saltus_real *feedback;    /* K x N: the learning signal's matrix (wout for exact / symmetric) */
    const saltus_real *targets;     /* B x T x K */
    const saltus_real *params;      /* the model's n_params values */
    saltus_real kappa, dt;
    const int *in_block;            /* n_in: the block each input feeds, ascending (NULL: the first);
                                       for a model with n_blocks > 1 */
} saltus_eprop_task;

typedef struct {
    saltus_real loss;               /* summed over trials */
    long spikes;
    saltus_real *grad_w;            /* N x n_in */
    saltus_real *grad_out;          /* K x N */
    saltus_real *grad_q;            /* n_q: the sums of the parameter quantities (0 for the weight) */
    size_t kept_bytes;              /* what one trial keeps: eligibility vectors and traces, state, gradient sums */
} saltus_eprop_result;

/* The e-prop gradient of one pass over every trial: 0, or -1 with a message. */
int saltus_eprop_layer(const saltus_eprop_model *em, const saltus_eprop_task *task, saltus_eprop_result *out, char *err, size_t cap);
void saltus_eprop_result_free(saltus_eprop_result *r);
/* A fixed random feedback matrix K x N, entries N(0, 1)/sqrt(N) from `seed` (a 64-bit LCG and Box-Muller). */
void saltus_eprop_random_feedback(int K, int N, unsigned long seed, saltus_real *out);

#endif /* SALTUS_EPROP_H */
