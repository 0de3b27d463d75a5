/* e-prop in generated C code: the layer pass of saltus_eprop.h (docs/eprop.md). Per step, in the
 * order of the derivation: spike test, eligibility update and trace per synapse (the weight)
 * and per neuron (each trained parameter) on the state at the start of the step, the spike
 * jump and flow, the arrivals of the step's input spikes, then the readout, its error, the
 * learning signal and the gradient sums. A model with several incoming blocks takes the _k
 * functions: each input's block (task->in_block) picks its weight quantity and arrival map, its
 * own input is that block's z_pre and the other blocks' is whether any of their inputs arrived. */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

void saltus_eprop_result_free(saltus_eprop_result *r)
{
    free(r->grad_w);
    free(r->grad_out);
    free(r->grad_q);
    r->grad_w = r->grad_out = r->grad_q = 0;
}

void saltus_eprop_random_feedback(int K, int N, unsigned long seed, saltus_real *out)
{
    /* common practice: Knuth's MMIX LCG constants, Box-Muller for the normal deviates */
    unsigned long long s = (unsigned long long)seed * 2862933555777941757ULL + 3037000493ULL;
    int i;
    for (i = 0; i < K * N; i++) {
        double u1, u2;
        s = s * 6364136223846793005ULL + 1442695040888963407ULL;
        u1 = ((double)(s >> 11) + 1.0) / 9007199254740993.0;
        s = s * 6364136223846793005ULL + 1442695040888963407ULL;
        u2 = (double)(s >> 11) / 9007199254740992.0;
        out[i] = (saltus_real)(sqrt(-2.0 * log(u1)) * cos(6.283185307179586 * u2) / sqrt((double)N));
    }
}

int saltus_eprop_layer(const saltus_eprop_model *em, const saltus_eprop_task *tk, saltus_eprop_result *out, char *err, size_t cap)
{
    const saltus_model *M = em->model;
    const int S = M->n_states, N = tk->N, nI = tk->n_in, K = tk->K, Q = em->n_q;
    const int nb = em->n_blocks > 1 ? em->n_blocks : 0; /* several blocks: the _k functions */
    const size_t syn = (size_t)N * (size_t)nI;
    int wq = -1, nw = 0, q, b, t, n, i, k, s;
    size_t reals;
    saltus_real *mem, *eps_w, *ebar_w, *eps_p, *ebar_p, *x, *y, *zbar, *z, *psi, *L, *err_k, *tmp, *nx, *xs, *anyb, *zk, *wk;
    memset(out, 0, sizeof *out);
    if (Q == 0) {
        snprintf(err, cap, "%s has no e-prop traces: %s", M->name, em->none ? em->none : "no surrogate");
        return -1;
    }
    for (q = 0; q < Q; q++) if (em->q_kind[q] == 0) { wq = q; nw++; }
    if (nb && (!em->update_k || !em->trace_k || !em->arrive_k || !em->block_q)) {
        snprintf(err, cap, "%s: its e-prop table lacks the functions of several incoming blocks", M->name);
        return -1;
    }
    for (i = 0; nb && tk->in_block && i < nI; i++)
        if (tk->in_block[i] < 0 || tk->in_block[i] >= nb || (i && tk->in_block[i] < tk->in_block[i - 1])) {
            snprintf(err, cap, "input %d: its block index %d is out of range or out of order", i, tk->in_block[i]);
            return -1;
        }
    /* per trial: eps_w S x syn, ebar_w syn, eps_p Q x S x N, ebar_p Q x N, x S x N, y K, zbar N,
       z, psi, L N, err K, three scratch vectors of S */
    reals = (size_t)S * syn + syn + (size_t)Q * S * N + (size_t)Q * N + (size_t)S * N + K + 4 * (size_t)N + K + 3 * (size_t)S + 3 * (size_t)nb;
    mem = (saltus_real *)calloc(reals, sizeof(saltus_real));
    out->grad_w = (saltus_real *)calloc(syn ? syn : 1, sizeof(saltus_real));
    out->grad_out = (saltus_real *)calloc((size_t)K * N + 1, sizeof(saltus_real));
    out->grad_q = (saltus_real *)calloc((size_t)Q, sizeof(saltus_real));
    if (!mem || !out->grad_w || !out->grad_out || !out->grad_q) {
        free(mem);
        saltus_eprop_result_free(out);
        snprintf(err, cap, "out of memory for the e-prop pass");
        return -1;
    }
    eps_w = mem;
    ebar_w = eps_w + (size_t)S * syn;
    eps_p = ebar_w + syn;
    ebar_p = eps_p + (size_t)Q * S * N;
    x = ebar_p + (size_t)Q * N;
    y = x + (size_t)S * N;
    zbar = y + K;
    z = zbar + N;
    psi = z + N;
    L = psi + N;
    err_k = L + N;
    tmp = err_k + K;
    nx = tmp + S;
    xs = nx + S;
    anyb = xs + S; /* per block: any input there in this step; then the z_pre and weight vectors */
    zk = anyb + nb;
    wk = zk + nb;
    /* what the planner counts (plan/plan.ts, e-prop): eligibility vectors and filtered traces of
       the weight and the parameters, the current state, the gradient sums */
    out->kept_bytes = sizeof(saltus_real) * ((size_t)S * syn + syn + (size_t)(Q - nw) * ((size_t)S * N + N) + (size_t)S * N + syn + (size_t)(Q - nw));
    for (b = 0; b < tk->B; b++) {
        memset(mem, 0, reals * sizeof(saltus_real));
        for (n = 0; n < N; n++) for (s = 0; s < S; s++) x[(size_t)s * N + n] = M->initial[s];
        for (t = 0; t < tk->T; t++) {
            const saltus_real tt = (saltus_real)t * tk->dt;
            const saltus_real *in = tk->inputs + ((size_t)b * tk->T + t) * nI;
            const saltus_real *tg = tk->targets + ((size_t)b * tk->T + t) * K;
            saltus_real anyin = 0, sp[2], e;
            for (i = 0; i < nI; i++) if (in[i] > 0) anyin = 1;
            for (k = 0; k < nb; k++) anyb[k] = 0;
            for (i = 0; i < nI && nb; i++) if (in[i] > 0) anyb[tk->in_block ? tk->in_block[i] : 0] = 1;
            for (n = 0; n < N; n++) {
                for (s = 0; s < S; s++) xs[s] = x[(size_t)s * N + n];
                em->spike(xs, tk->params, tt, sp);
                z[n] = sp[0];
                psi[n] = sp[1];
                out->spikes += sp[0] > 0;
                if (nb) {
                    for (i = 0; i < nI; i++) {
                        const size_t j = (size_t)n * nI + i;
                        const int kb = tk->in_block ? tk->in_block[i] : 0, qb = em->block_q[kb];
                        for (k = 0; k < nb; k++) { zk[k] = anyb[k]; wk[k] = 0; }
                        zk[kb] = in[i];
                        wk[kb] = tk->win[j];
                        for (s = 0; s < S; s++) tmp[s] = eps_w[(size_t)s * syn + j];
                        em->trace_k(qb, xs, tk->params, tt, tk->dt, z[n], zk, psi[n], wk, tmp, &e);
                        em->update_k(qb, xs, tk->params, tt, tk->dt, z[n], zk, psi[n], wk, tmp, nx);
                        for (s = 0; s < S; s++) eps_w[(size_t)s * syn + j] = nx[s];
                        ebar_w[j] = tk->kappa * ebar_w[j] + e;
                    }
                } else if (wq >= 0) {
                    for (i = 0; i < nI; i++) {
                        const size_t j = (size_t)n * nI + i;
                        for (s = 0; s < S; s++) tmp[s] = eps_w[(size_t)s * syn + j];
                        em->trace(wq, xs, tk->params, tt, tk->dt, z[n], in[i], psi[n], tk->win[j], tmp, &e);
                        em->update(wq, xs, tk->params, tt, tk->dt, z[n], in[i], psi[n], tk->win[j], tmp, nx);
                        for (s = 0; s < S; s++) eps_w[(size_t)s * syn + j] = nx[s];
                        ebar_w[j] = tk->kappa * ebar_w[j] + e;
                    }
                }
                for (q = 0; q < Q; q++) {
                    saltus_real *ep = eps_p + (size_t)q * S * N;
                    if (em->q_kind[q] == 0) continue;
                    for (s = 0; s < S; s++) tmp[s] = ep[(size_t)s * N + n];
                    if (nb) {
                        for (k = 0; k < nb; k++) { zk[k] = anyb[k]; wk[k] = 0; }
                        em->trace_k(q, xs, tk->params, tt, tk->dt, z[n], zk, psi[n], wk, tmp, &e);
                        em->update_k(q, xs, tk->params, tt, tk->dt, z[n], zk, psi[n], wk, tmp, nx);
                    } else {
                        em->trace(q, xs, tk->params, tt, tk->dt, z[n], anyin, psi[n], 0, tmp, &e);
                        em->update(q, xs, tk->params, tt, tk->dt, z[n], anyin, psi[n], 0, tmp, nx);
                    }
                    for (s = 0; s < S; s++) ep[(size_t)s * N + n] = nx[s];
                    ebar_p[(size_t)q * N + n] = tk->kappa * ebar_p[(size_t)q * N + n] + e;
                }
                em->step(xs, tk->params, tt, tk->dt, z[n], nx);
                for (i = 0; i < nI; i++) {
                    if (!(in[i] > 0) || (!em->arrive && !nb)) continue;
                    if (nb) em->arrive_k(tk->in_block ? tk->in_block[i] : 0, nx, tk->params, tk->win[(size_t)n * nI + i], tmp);
                    else em->arrive(nx, tk->params, tk->win[(size_t)n * nI + i], tmp);
                    for (s = 0; s < S; s++) nx[s] = tmp[s];
                }
                for (s = 0; s < S; s++) x[(size_t)s * N + n] = nx[s];
            }
            for (k = 0; k < K; k++) {
                saltus_real acc = 0;
                for (n = 0; n < N; n++) acc += tk->wout[(size_t)k * N + n] * z[n];
                y[k] = tk->kappa * y[k] + acc;
                err_k[k] = y[k] - tg[k];
                out->loss += (saltus_real)0.5 * err_k[k] * err_k[k];
            }
            for (n = 0; n < N; n++) {
                saltus_real acc = 0;
                for (k = 0; k < K; k++) acc += err_k[k] * tk->feedback[(size_t)k * N + n];
                L[n] = acc;
                zbar[n] = tk->kappa * zbar[n] + z[n];
            }
            if (wq >= 0) for (n = 0; n < N; n++) for (i = 0; i < nI; i++) out->grad_w[(size_t)n * nI + i] += L[n] * ebar_w[(size_t)n * nI + i];
            for (q = 0; q < Q; q++) {
                if (em->q_kind[q] == 0) continue;
                for (n = 0; n < N; n++) out->grad_q[q] += L[n] * ebar_p[(size_t)q * N + n];
            }
            for (k = 0; k < K; k++) for (n = 0; n < N; n++) out->grad_out[(size_t)k * N + n] += err_k[k] * zbar[n];
        }
    }
    free(mem);
    if (!isfinite((double)out->loss)) {
        snprintf(err, cap, "the e-prop pass's loss is not finite (a state diverged?)");
        saltus_eprop_result_free(out);
        return -1;
    }
    return 0;
}
