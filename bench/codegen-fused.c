/* Benchmark program of bench/codegen.mjs: the generated fused population steps of the LIF sample
 * (LifCurrent_pop_forward / LifCurrent_pop_backward, samples/lif_current.saltus) against a
 * hand-written fused loop doing the same arithmetic: the input jump, the closed-form propagator
 * of Rotter & Diesmann 1999 (Biol. Cybern. 81:381), the threshold test, for a neuron that crossed
 * the crossing located inside the step by Newton's method, the reset and the rest of the step; and
 * backward the transposed propagator, its parameter derivatives, and the spike adjoint (the
 * crossing time's sensitivity, EventProp's jump condition, Wunderlich & Pehle 2021).
 * Built with -DNN=<neurons> -DSTEPS=<forward steps> -DSTEPS_B=<forward+backward steps> -DDRIVE=<per mille>; saltus_real
 * is float or double as generated. Prints: seconds (best of REPS) for generated forward,
 * hand-written forward, generated forward+backward, hand-written forward+backward, then the
 * four checksums and the spike count of one forward run. */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>
#include "LifCurrent.h"

typedef saltus_real R;
#define EXPR SALTUS_MATH(exp)
#define NV 8
#define REPS 3

static R *V, *I, *in[NV], *T, *lamV, *lamI, *gin, *gpm, *gps, *hist;
static unsigned char *F, *Fh;
static R *Th;

static void init_state(void)
{
    long i;
    for (i = 0; i < NN; i++) { V[i] = (R)(0.9 * (double)(i % 97) / 97.0); I[i] = (R)(0.3 * (double)(i % 13) / 13.0); }
}

/* ---- hand-written ---- */
typedef struct { R tm, ts, th, pvv, pii, c, pvi; } hand_k;

static hand_k hand_consts(R tm, R ts, R th, R dt)
{
    hand_k k;
    k.tm = tm; k.ts = ts; k.th = th;
    k.pvv = EXPR(-dt / tm); k.pii = EXPR(-dt / ts); k.c = ts / (tm - ts); k.pvi = k.c * (k.pvv - k.pii);
    return k;
}

/* the crossing u in (0, dt] of V = th from (v0, i0): Newton in a shrinking bracket */
static R hand_locate(const hand_k *k, R v0, R i0, R dt)
{
    R lo = 0, hi = dt, u, v, dv, e1, e2, next;
    int it;
    u = dt * 0.5f;
    for (it = 0; it < 100; it++) {
        e1 = EXPR(-u / k->tm); e2 = EXPR(-u / k->ts);
        v = e1 * v0 + k->c * (e1 - e2) * i0 - k->th;
        dv = (e2 * i0 - (v + k->th)) / k->tm;
        if (v == 0) return u;
        if (v < 0) lo = u; else hi = u;
        next = u - v / dv;
        if (!(next > lo && next < hi)) next = (R)0.5 * (lo + hi);
        if (fabs((double)(next - u)) <= (double)SALTUS_ROUNDING * (double)dt || hi - lo <= SALTUS_ROUNDING * dt) return next;
        u = next;
    }
    return u;
}

static long hand_forward(R t, R dt, const hand_k *k, const R *restrict w, unsigned char *restrict f, R *restrict ts)
{
    R *restrict v = V, *restrict c = I;
    const R pvv = k->pvv, pii = k->pii, pvi = k->pvi, th = k->th;
    long i, cnt = 0;
    for (i = 0; i < NN; i++) {
        const R v0 = v[i], i0 = c[i] + w[i];
        const R v1 = pvv * v0 + pvi * i0, i1 = pii * i0;
        const int s = (v0 - th < 0) & (v1 - th >= 0);
        v[i] = s ? v0 : v1; c[i] = s ? i0 : i1; f[i] = (unsigned char)s; cnt += s;
    }
    if (!cnt) return 0;
    for (i = 0; i < NN; i++) {
        R u, ia, r, e1, e2;
        if (!f[i]) continue;
        u = hand_locate(k, v[i], c[i], dt);
        ts[i] = t + u;
        ia = EXPR(-u / k->ts) * c[i];
        r = (t + dt) - ts[i];
        e1 = EXPR(-r / k->tm); e2 = EXPR(-r / k->ts);
        v[i] = k->c * (e1 - e2) * ia;
        c[i] = e2 * ia;
    }
    return cnt;
}

/* propagator entries over h and their derivatives by tau_m and tau_s */
typedef struct { R pvv, pii, pvi, dvv_m, dvi_m, dvi_s, dii_s; } hand_d;
static hand_d hand_deriv(const hand_k *k, R h)
{
    hand_d d;
    const R tm = k->tm, ts = k->ts, dd = tm - ts;
    d.pvv = EXPR(-h / tm); d.pii = EXPR(-h / ts); d.pvi = k->c * (d.pvv - d.pii);
    d.dvv_m = h / (tm * tm) * d.pvv;
    d.dii_s = h / (ts * ts) * d.pii;
    d.dvi_m = ts * (-(d.pvv - d.pii) / (dd * dd) + d.dvv_m / dd);
    d.dvi_s = tm * (d.pvv - d.pii) / (dd * dd) - k->c * d.dii_s;
    return d;
}

static void hand_backward(R t, R dt, const hand_k *k, const R *restrict x0v, const R *restrict x0i, const R *restrict w,
                          const unsigned char *restrict f, const R *restrict tsp)
{
    R *restrict lv = lamV, *restrict li = lamI, *restrict gm = gpm, *restrict gs = gps, *restrict g = gin;
    const hand_d d = hand_deriv(k, dt);
    long i;
    for (i = 0; i < NN; i++) {
        const R v0 = x0v[i], i0 = x0i[i] + w[i], ev = lv[i], ei = li[i];
        const int s = f[i] != 0;
        const R nv = d.pvv * ev, ni = d.pvi * ev + d.pii * ei;
        lv[i] = s ? ev : nv;
        li[i] = s ? ei : ni;
        gm[i] += s ? (R)0 : ev * (d.dvv_m * v0 + d.dvi_m * i0);
        gs[i] += s ? (R)0 : ev * d.dvi_s * i0 + ei * d.dii_s * i0;
        g[i] = s ? (R)0 : ni;
    }
    for (i = 0; i < NN; i++) {
        R v0, i0, u, r, ia, vo, io, Lu, lbv, lbi, lai, slope, coef, ev, ei;
        hand_d a, b;
        if (!f[i]) continue;
        v0 = x0v[i]; i0 = x0i[i] + w[i]; ev = lv[i]; ei = li[i];
        u = tsp[i] - t; r = (t + dt) - tsp[i];
        a = hand_deriv(k, u); b = hand_deriv(k, r);
        ia = a.pii * i0;
        vo = b.pvi * ia; io = b.pii * ia;
        /* second segment (from the reset state (0, ia)) */
        lbv = b.pvv * ev; lbi = b.pvi * ev + b.pii * ei;
        gpm[i] += ev * b.dvi_m * ia;
        gps[i] += ev * b.dvi_s * ia + ei * b.dii_s * ia;
        Lu = -(ev * (io - vo) / k->tm - ei * io / k->ts);
        (void)lbv;
        /* spike jump V := 0: the costate of V is cut */
        lai = lbi;
        Lu += lai * (-ia / k->ts);
        slope = (ia - k->th) / k->tm;
        coef = -Lu / slope;
        /* first segment with la = (0, lai) and with the guard gradient (1, 0) */
        lv[i] = coef * a.pvv;
        li[i] = a.pii * lai + coef * a.pvi;
        gpm[i] += coef * (a.dvv_m * v0 + a.dvi_m * i0);
        gps[i] += lai * a.dii_s * i0 + coef * a.dvi_s * i0;
        gin[i] = li[i];
    }
}

/* ---- generated ---- */
static long gen_forward(const R *p, R t, R dt, const R *w, unsigned char *f, R *ts)
{
    R *x[2];
    x[0] = V; x[1] = I;
    return LifCurrent_pop_forward(NN, x, p, t, dt, w, f, ts);
}

static double now(void) { return (double)clock() / CLOCKS_PER_SEC; }

static double checksum_fw(const unsigned char *f, const R *ts, long spikes)
{
    double s = (double)spikes;
    long i;
    for (i = 0; i < NN; i++) s += (double)V[i] + 0.5 * (double)I[i] + (f[i] ? 1e-3 * (double)ts[i] : 0);
    return s;
}
static double checksum_bw(void)
{
    double s = 0;
    long i;
    for (i = 0; i < NN; i++) s += (double)lamV[i] + 0.5 * (double)lamI[i] + 1e-3 * ((double)gpm[i] + (double)gps[i]);
    return s;
}

int main(void)
{
    const R *p = LifCurrent_model.default_params;
    const R dt = (R)1e-4;
    const hand_k hk = hand_consts(p[0], p[1], p[2], dt);
    double best[4] = {1e300, 1e300, 1e300, 1e300}, sums[4] = {0, 0, 0, 0}, t0;
    long spikes = 0, i, j;
    int rep, k, v;
    unsigned long seed = 12345;
    R *gp[2];
    V = malloc(NN * sizeof(R)); I = malloc(NN * sizeof(R)); T = malloc(NN * sizeof(R));
    lamV = malloc(NN * sizeof(R)); lamI = malloc(NN * sizeof(R)); gin = malloc(NN * sizeof(R));
    gpm = malloc(NN * sizeof(R)); gps = malloc(NN * sizeof(R)); F = malloc(NN);
    hist = malloc((size_t)STEPS_B * 2 * NN * sizeof(R)); Fh = malloc((size_t)STEPS_B * NN); Th = malloc((size_t)STEPS_B * NN * sizeof(R));
    if (!V || !I || !T || !lamV || !lamI || !gin || !gpm || !gps || !F || !hist || !Fh || !Th) { fprintf(stderr, "out of memory\n"); return 2; }
    /* NV input vectors (invented drive): DRIVE per mille of the neurons get an arrival of 0.5-1.5 per step */
    for (v = 0; v < NV; v++) {
        in[v] = malloc(NN * sizeof(R));
        for (i = 0; i < NN; i++) {
            seed = seed * 6364136223846793005UL + 1442695040888963407UL;
            in[v][i] = ((seed >> 33) % 1000) < DRIVE ? (R)(0.5 + (double)((seed >> 20) % 1000) / 1000.0) : (R)0;
        }
    }
    gp[0] = gpm; gp[1] = gps;
    for (rep = 0; rep < REPS; rep++) {
        long cnt = 0, r;
        /* forward, generated */
        init_state(); memset(F, 0, NN); t0 = now();
        for (k = 0; k < STEPS; k++) { r = gen_forward(p, (R)k * dt, dt, in[k % NV], F, T); if (r < 0) { fprintf(stderr, "refused at step %d\n", k); return 3; } cnt += r; }
        t0 = now() - t0; if (t0 < best[0]) best[0] = t0;
        sums[0] = checksum_fw(F, T, cnt); spikes = cnt;
        /* forward, hand-written */
        init_state(); memset(F, 0, NN); cnt = 0; t0 = now();
        for (k = 0; k < STEPS; k++) cnt += hand_forward((R)k * dt, dt, &hk, in[k % NV], F, T);
        t0 = now() - t0; if (t0 < best[1]) best[1] = t0;
        sums[1] = checksum_fw(F, T, cnt);
        /* forward + backward, generated: states before each step kept, then the steps in reverse */
        for (j = 0; j < 2; j++) {
            init_state();
            for (i = 0; i < NN; i++) { lamV[i] = 0; lamI[i] = 0; gpm[i] = 0; gps[i] = 0; }
            t0 = now();
            for (k = 0; k < STEPS_B; k++) {
                memcpy(hist + (size_t)k * 2 * NN, V, NN * sizeof(R));
                memcpy(hist + (size_t)k * 2 * NN + NN, I, NN * sizeof(R));
                if (j == 0) { if (gen_forward(p, (R)k * dt, dt, in[k % NV], Fh + (size_t)k * NN, Th + (size_t)k * NN) < 0) return 3; }
                else hand_forward((R)k * dt, dt, &hk, in[k % NV], Fh + (size_t)k * NN, Th + (size_t)k * NN);
            }
            for (i = 0; i < NN; i++) { lamV[i] = (R)1; lamI[i] = (R)0.5; } /* dL/dx at the end: the state checksum's weights */
            for (k = STEPS_B - 1; k >= 0; k--) {
                R *x[2];
                x[0] = hist + (size_t)k * 2 * NN; x[1] = x[0] + NN;
                if (j == 0) {
                    R *l[2];
                    l[0] = lamV; l[1] = lamI;
                    LifCurrent_pop_backward(NN, x, p, (R)k * dt, dt, in[k % NV], Fh + (size_t)k * NN, Th + (size_t)k * NN, 0, l, gin, gp);
                } else hand_backward((R)k * dt, dt, &hk, x[0], x[1], in[k % NV], Fh + (size_t)k * NN, Th + (size_t)k * NN);
            }
            t0 = now() - t0; if (t0 < best[2 + j]) best[2 + j] = t0;
            sums[2 + j] = checksum_bw();
        }
    }
    printf("%.6e %.6e %.6e %.6e %.17g %.17g %.17g %.17g %ld\n", best[0], best[1], best[2], best[3], sums[0], sums[1], sums[2], sums[3], spikes);
    return 0;
}
