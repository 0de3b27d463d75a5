/* The grid runtime (docs/network-step.md): one trial of a network on a time grid with events
 * inside steps (forward), and the exact gradient of that simulation (backward), as Saltus's
 * grid simulator does it (server/src/grid/forward.ts, backward.ts; the same names are used
 * here). The per-trial functions touch only the trial's workspace, so trials run one after
 * another on the host or one per thread on a GPU. Nothing here knows a model: kernels are
 * called through the saltus_model table (SALTUS_CALL).
 * Quiet periods (docs/network-step.md item 7): a spike starts a countdown to s + D (ws->qend);
 * the neuron's segments then use the quiet map (saltus_seg.quiet), its guard is not tested, and
 * the end is an event of its own (kind 2) located inside the step; backward, its time
 * sensitivity goes to the spike that started it and T dD/dp to the parameters. */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#define SALTUS_R(v) ((saltus_real)(v))
#define SALTUS_INF SALTUS_R(INFINITY)

/* 3-point Gauss-Legendre nodes and weights on [0, 1] (the integral losses). */
SALTUS_HD static saltus_real saltus_gauss_node(int q)
{
    return q == 0 ? SALTUS_R(0.1127016653792583) : q == 1 ? SALTUS_R(0.5) : SALTUS_R(0.8872983346207417);
}

SALTUS_HD static saltus_real saltus_gauss_weight(int q)
{
    return q == 1 ? SALTUS_R(8.0 / 18.0) : SALTUS_R(5.0 / 18.0);
}

/* ---- divided differences of exp (the algorithm of server/src/symbolic/expdd.ts) ---- */

SALTUS_HD saltus_real saltus_phi1(saltus_real z)
{
    if (z != z) return z;
    if (isinf(z)) return z > 0 ? z : SALTUS_R(0);
    if (SALTUS_FABS(z) < SALTUS_R(1e-5)) return 1 + z / 2 + z * z / 6;
    return SALTUS_EXPM1(z) / z;
}

/* sum_j h_j(d) / (j + m)! for centred nodes d, |d| <= 1 (the complete homogeneous polynomials h_j):
 * term j is at most delta^j / j! times the first (delta = max |d|), so the sum stops at the first J
 * where that bound is below 1e-17 of it (at most 24 terms; a handful for the nodes of one grid
 * step, which is most of the cost of a spike's exact adjoint). */
SALTUS_HD static saltus_real saltus_expdd_taylor(int n, const saltus_real *d)
{
    saltus_real h[25], fact = 1, sum = 0, delta = 0, bound = 1;
    int j, k, J = 24;
    for (k = 0; k < n; k++) if (SALTUS_FABS(d[k]) > delta) delta = SALTUS_FABS(d[k]);
    for (j = 1; j <= 24; j++) {
        bound *= delta / (saltus_real)j;
        if (bound <= SALTUS_R(1e-17)) { J = j; break; }
    }
    h[0] = 1;
    for (j = 1; j <= J; j++) h[j] = 0;
    for (k = 0; k < n; k++) for (j = 1; j <= J; j++) h[j] = h[j] + d[k] * h[j - 1];
    for (k = 2; k <= n - 1; k++) fact *= (saltus_real)k;
    for (j = 0; j <= J; j++) {
        sum += h[j] / fact;
        fact *= (saltus_real)(j + n);
    }
    return sum;
}

/* Entry (0, n - 1) of exp of the bidiagonal matrix diag(y) + superdiagonal 1 (Opitz 1964), by a
 * 24-term Taylor series of B / 2^s and s squarings. */
SALTUS_NOINLINE SALTUS_HD static saltus_real saltus_expdd_matrix(int n, const saltus_real *y, saltus_real norm)
{
    saltus_real term[SALTUS_EXPDD_MAX][SALTUS_EXPDD_MAX], T[SALTUS_EXPDD_MAX][SALTUS_EXPDD_MAX];
    saltus_real nx[SALTUS_EXPDD_MAX][SALTUS_EXPDD_MAX], scale, acc, b;
    int s = 0, i, j, l, k, r;
    while (norm / SALTUS_LDEXP(SALTUS_R(1), s) > SALTUS_R(0.5) && s < 1100) s++;
    scale = SALTUS_LDEXP(SALTUS_R(1), -s);
    for (i = 0; i < n; i++) for (j = 0; j < n; j++) term[i][j] = T[i][j] = nx[i][j] = (i == j ? SALTUS_R(1) : SALTUS_R(0));
    for (k = 1; k <= 24; k++) {
        for (i = 0; i < n; i++) {
            for (j = i; j < n; j++) {
                acc = 0;
                for (l = i; l <= j; l++) {
                    b = l == j ? y[l] * scale : j == l + 1 ? scale : SALTUS_R(0);
                    acc += term[i][l] * b;
                }
                nx[i][j] = acc / (saltus_real)k;
            }
        }
        for (i = 0; i < n; i++) for (j = i; j < n; j++) { term[i][j] = nx[i][j]; T[i][j] += term[i][j]; }
    }
    for (r = 0; r < s; r++) {
        for (i = 0; i < n; i++) {
            for (j = i; j < n; j++) {
                acc = 0;
                for (l = i; l <= j; l++) acc += T[i][l] * T[l][j];
                nx[i][j] = acc;
            }
        }
        for (i = 0; i < n; i++) for (j = i; j < n; j++) T[i][j] = nx[i][j];
    }
    return T[0][n - 1];
}

SALTUS_NOINLINE SALTUS_HD saltus_real saltus_expdd(int n, const saltus_real *x)
{
    saltus_real c = -SALTUS_INF, ec, y[SALTUS_EXPDD_MAX], d[SALTUS_EXPDD_MAX], norm = 0, lo, hi, mean;
    int i;
    if (n < 1 || n > SALTUS_EXPDD_MAX) return SALTUS_R(NAN);
    for (i = 0; i < n; i++) {
        if (x[i] != x[i]) return x[i];
        if (x[i] > c) c = x[i];
    }
    if (n == 1) return SALTUS_EXP(x[0]);
    if (c == SALTUS_INF) return SALTUS_INF;
    if (c == -SALTUS_INF) return 0;
    ec = SALTUS_EXP(c);
    if (n == 2) return ec * saltus_phi1((x[0] < x[1] ? x[0] : x[1]) - c);
    for (i = 0; i < n; i++) {
        y[i] = x[i] - c;
        if (-y[i] > norm) norm = -y[i];
    }
    if (!isfinite(norm)) return 0;
    lo = SALTUS_INF;
    hi = -SALTUS_INF;
    for (i = 0; i < n; i++) {
        if (y[i] < lo) lo = y[i];
        if (y[i] > hi) hi = y[i];
    }
    if (hi - lo <= 1) {
        mean = 0;
        for (i = 0; i < n; i++) mean += y[i];
        mean /= (saltus_real)n;
        for (i = 0; i < n; i++) d[i] = y[i] - mean;
        return ec * (SALTUS_EXP(mean) * saltus_expdd_taylor(n, d));
    }
    return ec * saltus_expdd_matrix(n, y, norm);
}

/* ---- scratch vectors of one trial ---- */

enum { V_Y, V_RATE, V_SEG, V_SEGLAM, V_LAMEND, V_LAMSTART, V_XA, V_Y2, V_SRC, V_BACK, V_POST, V_ZERO, V_XA2, V_OUT2,
    V_R2, V_LAMPOST, V_MU, V_RATE2, V_COUNT };

typedef struct {
    saltus_real *v[V_COUNT];    /* max_S each */
    saltus_real *starts;        /* SALTUS_MAX_SUBSTEPS * max_S: sub-step starts of one VJP */
    saltus_real *kseg, *kb;     /* kernel outputs: 4 max_S + max_G + 4 each */
} saltus_tmp;

static size_t saltus_scratch_size(const saltus_plan *plan)
{
    size_t S = (size_t)plan->max_S, K = 4 * S + (size_t)plan->max_G + 4;
    return (V_COUNT + SALTUS_MAX_SUBSTEPS) * S + 2 * K;
}

SALTUS_HD static void saltus_carve(saltus_tmp *t, const saltus_plan *plan, saltus_real *scratch)
{
    size_t S = (size_t)plan->max_S, K = 4 * S + (size_t)plan->max_G + 4;
    int i;
    for (i = 0; i < V_COUNT; i++) t->v[i] = scratch + (size_t)i * S;
    t->starts = scratch + V_COUNT * S;
    t->kseg = t->starts + SALTUS_MAX_SUBSTEPS * S;
    t->kb = t->kseg + K;
}

/* ---- one neuron's segment map G(x, a, h): the step map in m equal sub-steps (grid/segment.ts) ---- */

typedef struct {
    const saltus_model *M;
    const saltus_real *p;
    int S, G, m;
    int quiet;                  /* the quiet mode's map */
} saltus_seg;

/* A map kernel of the segment's mode. */
#define SEG_CALL(g, kernel, ...) ((g)->quiet ? SALTUS_CALL((g)->M, quiet_##kernel, __VA_ARGS__) : SALTUS_CALL((g)->M, kernel, __VA_ARGS__))

/* G(x, a, h) into out. */
SALTUS_NOINLINE SALTUS_HD static void seg_apply(const saltus_seg *g, const saltus_real *x, saltus_real a, saltus_real h, saltus_real *out, saltus_tmp *t)
{
    saltus_real sub = h / (saltus_real)g->m, *tmp = t->v[V_SEG];
    int s, i;
    for (i = 0; i < g->S; i++) out[i] = x[i];
    if (!(h > 0)) return;
    for (s = 0; s < g->m; s++) {
        SEG_CALL(g, map_step, out, g->p, a + (saltus_real)s * sub, sub, tmp);
        for (i = 0; i < g->S; i++) out[i] = tmp[i];
    }
}

/* G(x, a, u) into out and dG/du into rate. */
SALTUS_NOINLINE SALTUS_HD static void seg_apply_rate(const saltus_seg *g, const saltus_real *x, saltus_real a, saltus_real u, saltus_real *out,
                                     saltus_real *rate, saltus_tmp *t)
{
    saltus_real sub = u / (saltus_real)g->m, *k = t->kseg;
    int s, i, S = g->S;
    for (i = 0; i < S; i++) { out[i] = x[i]; rate[i] = 0; }
    for (s = 0; s < g->m; s++) {
        SEG_CALL(g, map_jvp, out, g->p, a + (saltus_real)s * sub, sub, rate, k);
        for (i = 0; i < S; i++) {
            out[i] = k[i];
            rate[i] = k[S + i] + k[2 * S + i] / (saltus_real)g->m + k[3 * S + i] * ((saltus_real)s / (saltus_real)g->m);
        }
    }
}

/* lamStart = (dG/dx)^T lamEnd; grads[q] += lamEnd . dG/dp_q (when grads); *dh = lamEnd . dG/dh,
 * *da = lamEnd . dG/da (the start moved with the length held). lamStart may be lamEnd. */
SALTUS_NOINLINE SALTUS_HD static void seg_vjp(const saltus_seg *g, const saltus_real *xa, saltus_real a, saltus_real h, const saltus_real *lamEnd,
                              saltus_real *lamStart, saltus_real *grads, saltus_real *dh, saltus_real *da, saltus_tmp *t)
{
    saltus_real sub = h / (saltus_real)g->m, *lam = t->v[V_SEGLAM], *k = t->kseg, *st = t->starts;
    saltus_real sh = 0, sa = 0;
    int s, i, q, S = g->S;
    for (i = 0; i < S; i++) { st[i] = xa[i]; lam[i] = lamEnd[i]; }
    for (s = 0; s < g->m - 1; s++) SEG_CALL(g, map_step, st + (size_t)s * S, g->p, a + (saltus_real)s * sub, sub, st + (size_t)(s + 1) * S);
    for (s = g->m - 1; s >= 0; s--) {
        SEG_CALL(g, map_vjp, st + (size_t)s * S, g->p, a + (saltus_real)s * sub, sub, lam, k);
        sh = sh + k[S] / (saltus_real)g->m + k[S + 1] * ((saltus_real)s / (saltus_real)g->m);
        sa = sa + k[S + 1];
        if (grads) for (q = 0; q < g->G; q++) grads[q] += k[S + 2 + q];
        for (i = 0; i < S; i++) lam[i] = k[i];
    }
    for (i = 0; i < S; i++) lamStart[i] = lam[i];
    *dh = sh;
    *da = sa;
}

SALTUS_HD static int saltus_crossed(int direction, saltus_real g0, saltus_real g1)
{
    int up = g0 < 0 && g1 >= 0, down = g0 > 0 && g1 <= 0;
    return direction > 0 ? up : direction < 0 ? down : (up || down);
}

/* A jump from guard value g0 to g1 fires the neuron (docs/language.md, "Spikes fired by jumps"):
 * up g0 <= 0 < g1, down g0 >= 0 > g1, either one of them (kernels.ts `jumpCrossed`). */
SALTUS_HD static int saltus_jump_crossed(int direction, saltus_real g0, saltus_real g1)
{
    int up = g0 <= 0 && g1 > 0, down = g0 >= 0 && g1 < 0;
    return direction > 0 ? up : direction < 0 ? down : (up || down);
}

SALTUS_HD static int saltus_fired_side(int direction, saltus_real g)
{
    return direction > 0 ? g > 0 : direction < 0 ? g < 0 : 0;
}

/* The guard along the segment at u, and its slope. */
SALTUS_HD static void guard_at(const saltus_seg *g, const saltus_real *x, saltus_real a, saltus_real u, saltus_real *gv, saltus_real *dg,
                               saltus_tmp *t)
{
    saltus_real *y = t->v[V_Y], *rate = t->v[V_RATE], *k = t->kb, d;
    int s;
    seg_apply_rate(g, x, a, u, y, rate, t);
    *gv = SALTUS_CALL(g->M, guard, y, g->p, a + u);
    SALTUS_CALL(g->M, guard_grad, y, g->p, a + u, k);
    d = k[g->S];
    for (s = 0; s < g->S; s++) d += k[s] * rate[s];
    *dg = d;
}

SALTUS_HD static saltus_real guard_only(const saltus_seg *g, const saltus_real *x, saltus_real a, saltus_real u, saltus_tmp *t)
{
    saltus_real *y = t->v[V_Y];
    seg_apply(g, x, a, u, y, t);
    return SALTUS_CALL(g->M, guard, y, g->p, a + u);
}

/* The root u in (0, h] of the guard with g(0) = g0, g(h) = g1 of opposite signs: Newton steps kept
 * inside a shrinking bracket, bisection where a step leaves it, to rounding level (forward.ts `locate`). */
SALTUS_NOINLINE SALTUS_HD static saltus_real saltus_locate(const saltus_seg *g, const saltus_real *x, saltus_real a, saltus_real g0, saltus_real g1,
                                           saltus_real h, saltus_tmp *t)
{
    saltus_real lo = 0, hi = h, glo = g0, u, gv, dg, next, au, hb;
    int it;
    if (g1 == 0) return h;
    u = h * g0 / (g0 - g1);
    if (!(u > lo && u < hi)) u = SALTUS_R(0.5) * h;
    for (it = 0; it < 100; it++) {
        guard_at(g, x, a, u, &gv, &dg, t);
        if (gv == 0) return u;
        if ((gv < 0) == (glo < 0)) { lo = u; glo = gv; } else hi = u;
        next = u - gv / dg;
        if (!(next > lo && next < hi) || !isfinite(next)) next = SALTUS_R(0.5) * (lo + hi);
        au = SALTUS_FABS(u);
        hb = h * SALTUS_R(1e-3);
        if (SALTUS_FABS(next - u) <= SALTUS_ROUNDING * (au > hb ? au : hb) || hi - lo <= SALTUS_ROUNDING * h) return next;
        u = next;
    }
    return u;
}

/* The crossing in (0, h] of the guard along a segment starting at g0, or infinity; a flow that blows
 * up before the end is bisected for a finite point on the fired side first (forward.ts `locateCrossing`). */
SALTUS_HD static saltus_real saltus_locate_crossing(const saltus_seg *g, const saltus_real *x, saltus_real a, int direction,
                                                    saltus_real g0, saltus_real h, saltus_tmp *t)
{
    saltus_real g1 = guard_only(g, x, a, h, t), lo = 0, hi = h, mid, gm;
    int it;
    if (isfinite(g1)) return saltus_crossed(direction, g0, g1) ? saltus_locate(g, x, a, g0, g1, h, t) : SALTUS_INF;
    for (it = 0; it < 80; it++) {
        mid = SALTUS_R(0.5) * (lo + hi);
        gm = guard_only(g, x, a, mid, t);
        if (!isfinite(gm)) hi = mid;
        else if (saltus_crossed(direction, g0, gm)) return saltus_locate(g, x, a, g0, gm, mid, t);
        else lo = mid;
    }
    return SALTUS_INF;
}

/* ---- workspace ---- */

size_t saltus_ws_reals(const saltus_plan *plan)
{
    size_t grid = (size_t)(plan->steps + 1) * (size_t)plan->n_grid;
    return 2 * plan->x_total + 4 * (size_t)plan->n_total + (size_t)plan->steps * plan->ck_stride + grid
        + 2 * (size_t)plan->n_loss + (size_t)plan->g_total + saltus_scratch_size(plan);
}

size_t saltus_ws_ints(const saltus_plan *plan)
{
    return 6 * (size_t)plan->n_total + (size_t)plan->n_loss + 1 + (size_t)plan->n_populations;
}

SALTUS_HD void saltus_ws_attach(saltus_trial_ws *ws, const saltus_plan *plan, saltus_real *reals, int *ints)
{
    saltus_real *r = reals;
    ws->x = r; r += plan->x_total;
    ws->lam = r; r += plan->x_total;
    ws->tau = r; r += plan->n_total;
    ws->cur = r; r += plan->n_total;
    ws->checkpoints = r; r += (size_t)plan->steps * plan->ck_stride;
    ws->grid_values = r; r += (size_t)(plan->steps + 1) * (size_t)plan->n_grid;
    ws->loss_values = r; r += plan->n_loss;
    ws->loss_coef = r; r += plan->n_loss;
    ws->grad = r; r += plan->g_total;
    ws->jref = r; r += plan->n_total;
    ws->qend = r; r += plan->n_total;
    ws->scratch = r;
    ws->start = ints;
    ws->fired = ints + plan->n_total;
    ws->argmax = ints + 2 * plan->n_total;
    ws->jflag = ints + 2 * plan->n_total + plan->n_loss + 1;
    ws->jlast = ws->jflag + plan->n_total;
    ws->jlastn = ws->jlast + plan->n_populations;
    ws->qcause = ws->jlastn + plan->n_total;
    ws->qmode = ws->qcause + plan->n_total;
}

/* Room for `need` elements in a growable array (realloc on the host), or SALTUS_E_CAPACITY
 * (a fixed capacity, as on a GPU). */
#if defined(__CUDA_ARCH__)
#define SALTUS_DEFINE_RESERVE(fname, type, arr, cap) \
    SALTUS_HD static int fname(saltus_trial_ws *ws, size_t need) { return need <= ws->cap ? SALTUS_OK : SALTUS_E_CAPACITY; }
#else
#define SALTUS_DEFINE_RESERVE(fname, type, arr, cap) \
    SALTUS_HD static int fname(saltus_trial_ws *ws, size_t need) \
    { \
        size_t c; \
        type *p; \
        if (need <= ws->cap) return SALTUS_OK; \
        if (!ws->growable) return SALTUS_E_CAPACITY; \
        c = ws->cap ? ws->cap : 64; \
        while (c < need) c *= 2; \
        p = (type *)realloc(ws->arr, c * sizeof(type)); \
        if (!p) return SALTUS_E_MEMORY; \
        ws->arr = p; \
        ws->cap = c; \
        return SALTUS_OK; \
    }
#endif
SALTUS_DEFINE_RESERVE(reserve_events, saltus_event, events, cap_events)
SALTUS_DEFINE_RESERVE(reserve_xbuf, saltus_real, xbuf, cap_xbuf)
SALTUS_DEFINE_RESERVE(reserve_sbuf, int, sbuf, cap_sbuf)
SALTUS_DEFINE_RESERVE(reserve_queue, saltus_pending, queue, cap_queue)
SALTUS_DEFINE_RESERVE(reserve_T, saltus_real, T, cap_T)
SALTUS_DEFINE_RESERVE(reserve_Tn, saltus_real, Tn, cap_Tn)

int saltus_ws_init(saltus_trial_ws *ws, const saltus_plan *plan)
{
    saltus_real *reals;
    int *ints;
    memset(ws, 0, sizeof *ws);
    ws->growable = 1;
    reals = (saltus_real *)calloc(saltus_ws_reals(plan), sizeof(saltus_real));
    ints = (int *)calloc(saltus_ws_ints(plan), sizeof(int));
    if (!reals || !ints) { free(reals); free(ints); return SALTUS_E_MEMORY; }
    saltus_ws_attach(ws, plan, reals, ints);
    return SALTUS_OK;
}

void saltus_ws_free(saltus_trial_ws *ws)
{
    free(ws->x);
    free(ws->start);
    free(ws->events);
    free(ws->xbuf);
    free(ws->sbuf);
    free(ws->queue);
    free(ws->T);
    free(ws->Tn);
    memset(ws, 0, sizeof *ws);
}

/* ---- pending arrivals: a binary heap ordered by (time, seq) ---- */

SALTUS_HD static int pending_less(const saltus_pending *a, const saltus_pending *b)
{
    return a->time < b->time || (a->time == b->time && a->seq < b->seq);
}

SALTUS_HD static int queue_push(saltus_trial_ws *ws, saltus_real time, int projection, int source, int cause, int targeted, saltus_real delay)
{
    size_t i, j;
    saltus_pending p, tmp;
    int rc = reserve_queue(ws, ws->n_queue + 1);
    if (rc) return rc;
    p.time = time;
    p.seq = ws->seq++;
    p.projection = projection;
    p.source = source;
    p.cause = cause;
    p.targeted = targeted;
    p.delay = delay;
    i = ws->n_queue++;
    ws->queue[i] = p;
    while (i > 0) {
        j = (i - 1) / 2;
        if (!pending_less(&ws->queue[i], &ws->queue[j])) break;
        tmp = ws->queue[i]; ws->queue[i] = ws->queue[j]; ws->queue[j] = tmp;
        i = j;
    }
    return SALTUS_OK;
}

SALTUS_HD static saltus_pending queue_pop(saltus_trial_ws *ws)
{
    saltus_pending top = ws->queue[0], tmp;
    size_t i = 0, l, r, m, n;
    n = --ws->n_queue;
    if (n > 0) {
        ws->queue[0] = ws->queue[n];
        for (;;) {
            l = 2 * i + 1; r = l + 1; m = i;
            if (l < n && pending_less(&ws->queue[l], &ws->queue[m])) m = l;
            if (r < n && pending_less(&ws->queue[r], &ws->queue[m])) m = r;
            if (m == i) break;
            tmp = ws->queue[i]; ws->queue[i] = ws->queue[m]; ws->queue[m] = tmp;
            i = m;
        }
    }
    return top;
}

/* The earliest pending arrival into population `pop` (infinity when none). */
SALTUS_HD static saltus_real queue_next_into(const saltus_network *net, const saltus_trial_ws *ws, int pop)
{
    saltus_real best = SALTUS_INF;
    size_t k;
    for (k = 0; k < ws->n_queue; k++) {
        const saltus_pending *p = &ws->queue[k];
        if (p->time < best && net->projections[p->projection].to == pop) best = p->time;
    }
    return best;
}

/* Whether neuron n of projection pr's target receives the targeted arrival (source, delay d). */
SALTUS_HD static int saltus_is_target(const saltus_network *net, const saltus_projection *pr, int n, int source, saltus_real d)
{
    if (pr->from == pr->to && n == source) return 0;
    return pr->delays[(size_t)n * net->populations[pr->from].size + source] == d;
}

/* What a spike of `source` at s sends along projection j (forward.ts `schedule`): one arrival at s
 * for the whole target, or with delays one per distinct delay d (ascending) for the neurons with
 * that delay; one at or after the duration is dropped. */
SALTUS_HD static int queue_schedule(const saltus_network *net, saltus_trial_ws *ws, int j, int source, saltus_real s, int cause)
{
    const saltus_projection *pr = &net->projections[j];
    int n, rows = net->populations[pr->to].size, found, rc;
    saltus_real prev = -SALTUS_INF, d, v;
    if (!pr->delays) return queue_push(ws, s, j, source, cause, 0, 0);
    for (;;) {
        d = SALTUS_INF;
        found = 0;
        for (n = 0; n < rows; n++) {
            if (pr->from == pr->to && n == source) continue;
            v = pr->delays[(size_t)n * net->populations[pr->from].size + source];
            if (v > prev && v < d) { d = v; found = 1; }
        }
        if (!found) return SALTUS_OK;
        if (s + d < net->duration) {
            rc = queue_push(ws, s + d, j, source, cause, 1, d);
            if (rc) return rc;
        }
        prev = d;
    }
}

/* ---- forward ---- */

typedef struct {
    const saltus_network *net;
    const saltus_plan *plan;
    saltus_trial_ws *ws;
    saltus_tmp t;
    int lp, ls;
} saltus_ctx;

SALTUS_HD static void seg_of(const saltus_ctx *c, int p, saltus_seg *g)
{
    const saltus_population *P = &c->net->populations[p];
    g->M = P->model;
    g->p = P->params;
    g->S = c->plan->pops[p].S;
    g->G = c->plan->pops[p].G;
    g->m = c->plan->pops[p].m;
    g->quiet = 0;
}

/* The segment map of neuron n of population p in its mode (quiet: the quiet map, its sub-steps). */
SALTUS_HD static void seg_of_mode(const saltus_ctx *c, int p, int quiet, saltus_seg *g)
{
    seg_of(c, p, g);
    if (quiet) { g->quiet = 1; g->m = c->plan->pops[p].mq; }
}

/* Neuron n of population p to time `to`, integrating the loss on the way (forward.ts `advance`). */
SALTUS_NOINLINE SALTUS_HD static void fw_advance(saltus_ctx *c, int p, int n, saltus_real to)
{
    const saltus_pop_plan *pp = &c->plan->pops[p];
    const saltus_loss *loss = &c->net->loss;
    saltus_trial_ws *ws = c->ws;
    saltus_real *x = ws->x + pp->x_off + (size_t)n * pp->S, *y = c->t.v[V_Y2];
    saltus_real a = ws->tau[pp->n_off + n], h = to - a, acc, X;
    saltus_seg g;
    int q, i;
    if (!(h > 0)) { ws->tau[pp->n_off + n] = to; return; }
    seg_of_mode(c, p, ws->qend[pp->n_off + n] < SALTUS_INF, &g);
    if (p == c->lp && c->plan->integral) {
        acc = 0;
        for (q = 0; q < 3; q++) {
            seg_apply(&g, x, a, saltus_gauss_node(q) * h, y, &c->t);
            X = y[c->ls];
            if (loss->kind == SALTUS_LOSS_STATE_INTEGRAL) acc += saltus_gauss_weight(q) * (SALTUS_R(0.5) * ((X - loss->target[n]) * (X - loss->target[n])));
            else acc += saltus_gauss_weight(q) * X;
        }
        if (loss->kind == SALTUS_LOSS_STATE_INTEGRAL) ws->integral += h * acc;
        else ws->loss_values[n] += h * acc;
    }
    seg_apply(&g, x, a, h, y, &c->t);
    for (i = 0; i < pp->S; i++) x[i] = y[i];
    ws->tau[pp->n_off + n] = to;
}

/* The crossing time of neuron n of population p in (tau, e], or infinity. */
SALTUS_HD static saltus_real fw_crossing(saltus_ctx *c, int p, int n, saltus_real e)
{
    const saltus_pop_plan *pp = &c->plan->pops[p];
    const saltus_model *M = c->net->populations[p].model;
    const saltus_real *x = c->ws->x + pp->x_off + (size_t)n * pp->S;
    saltus_real a = c->ws->tau[pp->n_off + n], h = e - a, g0;
    saltus_seg g;
    if (!(h > 0) || c->ws->qend[pp->n_off + n] < SALTUS_INF) return SALTUS_INF; /* a quiet neuron's guard is not tested */
    seg_of(c, p, &g);
    g0 = SALTUS_CALL(M, guard, x, g.p, a);
    return a + saltus_locate_crossing(&g, x, a, M->direction, g0, h, &c->t);
}

SALTUS_HD static int fw_fail(saltus_trial_ws *ws, int code, int pop, int neuron, int state, saltus_real time)
{
    ws->status = code;
    ws->err_pop = pop;
    ws->err_neuron = neuron;
    ws->err_state = state;
    ws->err_time = time;
    return code;
}

/* A spike of neuron n of population p at time s (its segment already advanced there): log,
 * spike jump, the fired-side check, arrivals for its targets (forward.ts `emit`); by_jump as in
 * saltus_event. */
SALTUS_NOINLINE SALTUS_HD static int fw_emit(saltus_ctx *c, int p, int n, saltus_real s, int step, int by_jump)
{
    const saltus_network *net = c->net;
    const saltus_plan *plan = c->plan;
    saltus_trial_ws *ws = c->ws;
    const saltus_pop_plan *pp = &plan->pops[p];
    const saltus_model *M = net->populations[p].model;
    const saltus_real *par = net->populations[p].params;
    const saltus_loss *loss = &net->loss;
    saltus_real *x, *xPre, *y = c->t.v[V_Y2], after;
    saltus_event *E;
    int ev = (int)ws->n_events, S = pp->S, i, j, rc;
    rc = reserve_events(ws, ws->n_events + 1);
    if (!rc) rc = reserve_xbuf(ws, ws->n_xbuf + (size_t)S);
    if (rc) return fw_fail(ws, rc, -1, -1, -1, 0);
    x = ws->x + pp->x_off + (size_t)n * S;
    xPre = ws->xbuf + ws->n_xbuf;
    for (i = 0; i < S; i++) xPre[i] = x[i];
    E = &ws->events[ws->n_events++];
    E->kind = 1;
    E->step = step;
    E->time = s;
    E->pop = p;
    E->neuron = n;
    E->first = !ws->fired[pp->n_off + n];
    E->start = ws->start[pp->n_off + n];
    E->projection = E->source = E->cause = -1;
    E->by_jump = by_jump;
    E->targeted = 0;
    E->delay = 0;
    E->tn_at = 0;
    E->x_at = ws->n_xbuf;
    E->s_at = (size_t)-1;
    ws->n_xbuf += (size_t)S;
    ws->fired[pp->n_off + n] = 1;
    SALTUS_CALL(M, spike_jump, xPre, par, s, y);
    for (i = 0; i < S; i++) x[i] = y[i];
    ws->start[pp->n_off + n] = ev;
    after = SALTUS_CALL(M, guard, x, par, ws->tau[pp->n_off + n]);
    if (!isfinite(after) || saltus_fired_side(M->direction, after)) return fw_fail(ws, SALTUS_E_FIRED_SIDE, p, n, -1, s);
    ws->jref[pp->n_off + n] = after;
    if (pp->qdur > 0) { ws->qend[pp->n_off + n] = s + pp->qdur; ws->qcause[pp->n_off + n] = ev; } /* the quiet period starts */
    if (p == c->lp && E->first && (loss->kind == SALTUS_LOSS_SPIKE_TIME || loss->kind == SALTUS_LOSS_CE_FIRST_SPIKE)) ws->loss_values[n] = s;
    for (j = 0; j < net->n_projections; j++) {
        if (net->projections[j].from != p) continue;
        rc = queue_schedule(net, ws, j, n, s, ev);
        if (rc) return fw_fail(ws, rc, -1, -1, -1, 0);
    }
    if (++ws->spike_count > plan->max_spikes) return fw_fail(ws, SALTUS_E_SPIKES, -1, -1, -1, s);
    return SALTUS_OK;
}

/* A new instant at time s (spikes fired by jumps): every population untouched. */
SALTUS_HD static void fw_open_instant(saltus_ctx *c, saltus_real s)
{
    saltus_trial_ws *ws = c->ws;
    int p, n;
    if (s == ws->inst) return;
    ws->inst = s;
    for (p = 0; p < c->net->n_populations; p++) {
        const saltus_pop_plan *pp = &c->plan->pops[p];
        ws->jlast[p] = -1;
        if (!c->net->populations[p].model) continue;
        for (n = 0; n < pp->n; n++) { ws->jref[pp->n_off + n] = SALTUS_R(NAN); ws->jflag[pp->n_off + n] = 0; ws->jlastn[pp->n_off + n] = -1; }
    }
}

/* Population p's guards at the start of the instant, when not taken yet. */
SALTUS_HD static void fw_touch(saltus_ctx *c, int p)
{
    const saltus_pop_plan *pp = &c->plan->pops[p];
    const saltus_model *M = c->net->populations[p].model;
    saltus_trial_ws *ws = c->ws;
    int n;
    if (!M || !M->has_guard || pp->n == 0 || !isnan(ws->jref[pp->n_off])) return;
    for (n = 0; n < pp->n; n++)
        ws->jref[pp->n_off + n] = SALTUS_CALL(M, guard, ws->x + pp->x_off + (size_t)n * pp->S, c->net->populations[p].params, ws->tau[pp->n_off + n]);
}

/* Spikes fired by jumps at instant s while no arrival there is pending: the first neuron
 * (populations in order, then by index) carried across since the start of the instant (or its
 * own spike there), or on the fired side at t = 0, fires; then the test repeats. */
SALTUS_HD static int fw_jump_fired(saltus_ctx *c, saltus_real s, int step)
{
    saltus_trial_ws *ws = c->ws;
    int p, n, hitP, hitN, rc;
    for (;;) {
        if (ws->n_queue > 0 && ws->queue[0].time == s) return SALTUS_OK;
        hitP = hitN = -1;
        for (p = 0; p < c->net->n_populations && hitP < 0; p++) {
            const saltus_pop_plan *pp = &c->plan->pops[p];
            const saltus_model *M = c->net->populations[p].model;
            if (!M || !M->has_guard) continue;
            for (n = 0; n < pp->n; n++) {
                int k = pp->n_off + n, flag = ws->jflag[k];
                saltus_real g;
                if (ws->qend[k] < SALTUS_INF) continue; /* quiet: cannot fire */
                g = SALTUS_CALL(M, guard, ws->x + pp->x_off + (size_t)n * pp->S, c->net->populations[p].params, ws->tau[k]);
                if (((flag & 4) && !(flag & 2)) || saltus_jump_crossed(M->direction, ws->jref[k], g)) { hitP = p; hitN = n; break; }
            }
        }
        if (hitP < 0) return SALTUS_OK;
        n = c->plan->pops[hitP].n_off + hitN;
        if (ws->jflag[n] & 2) return fw_fail(ws, SALTUS_E_JUMP_LOOP, hitP, hitN, -1, s);
        ws->jflag[n] |= 2;
        rc = fw_emit(c, hitP, hitN, s, step, ws->jlast[hitP] > ws->jlastn[n] ? ws->jlast[hitP] : ws->jlastn[n]);
        if (rc) return rc;
    }
}

SALTUS_HD int saltus_trial_forward(const saltus_network *net, const saltus_plan *plan, int b, saltus_trial_ws *ws)
{
    const saltus_trial *tr = &net->trials[b];
    const saltus_loss *loss = &net->loss;
    saltus_ctx c;
    int p, n, i, j, k, step, rc, lp = loss->population, nl = plan->n_loss;
    int first_spike = loss->kind == SALTUS_LOSS_SPIKE_TIME || loss->kind == SALTUS_LOSS_CE_FIRST_SPIKE;
    c.net = net;
    c.plan = plan;
    c.ws = ws;
    c.lp = lp;
    c.ls = loss->state;
    saltus_carve(&c.t, plan, ws->scratch);
    ws->n_events = ws->n_xbuf = ws->n_sbuf = ws->n_queue = ws->n_tn = 0;
    ws->seq = 0;
    ws->spike_count = 0;
    ws->integral = 0;
    ws->loss = 0;
    ws->status = SALTUS_OK;
    for (n = 0; n < nl; n++) { ws->loss_values[n] = first_spike ? SALTUS_R(NAN) : SALTUS_R(0); ws->loss_coef[n] = 0; ws->argmax[n] = 0; }
    for (p = 0; p < net->n_populations; p++) {
        const saltus_pop_plan *pp = &plan->pops[p];
        if (!net->populations[p].model) continue;
        for (n = 0; n < pp->n; n++) {
            for (i = 0; i < pp->S; i++) ws->x[pp->x_off + (size_t)n * pp->S + i] = net->populations[p].initial[i];
            ws->tau[pp->n_off + n] = 0;
            ws->start[pp->n_off + n] = -1;
            ws->fired[pp->n_off + n] = 0;
            ws->qend[pp->n_off + n] = SALTUS_INF;
            ws->qcause[pp->n_off + n] = -1;
        }
    }
    ws->inst = 0;
    for (p = 0; p < net->n_populations; p++) {
        const saltus_pop_plan *pp = &plan->pops[p];
        const saltus_model *M = net->populations[p].model;
        ws->jlast[p] = -1;
        if (!M) continue;
        for (n = 0; n < pp->n; n++) {
            saltus_real g = M->has_guard ? SALTUS_CALL(M, guard, ws->x + pp->x_off + (size_t)n * pp->S, net->populations[p].params, 0) : SALTUS_R(NAN);
            ws->jref[pp->n_off + n] = g;
            ws->jflag[pp->n_off + n] = M->has_guard && saltus_fired_side(M->direction, g) ? 4 : 0;
            ws->jlastn[pp->n_off + n] = -1;
        }
    }
    for (j = 0; j < net->n_projections; j++) {
        int from = net->projections[j].from;
        if (net->populations[from].model) continue;
        for (k = 0; k < tr->n_inputs; k++) {
            if (tr->input_pop[k] != from) continue;
            rc = queue_schedule(net, ws, j, tr->input_index[k], tr->input_time[k], -1);
            if (rc) return fw_fail(ws, rc, -1, -1, -1, 0);
        }
    }

    for (step = 0; step < plan->steps; step++) {
        saltus_real tEnd = step == plan->steps - 1 ? net->duration : (saltus_real)((double)(step + 1) * plan->dt);
        for (p = 0; p < net->n_populations; p++) {
            const saltus_pop_plan *pp = &plan->pops[p];
            if (!net->populations[p].model) continue;
            for (n = 0; n < pp->n; n++) ws->start[pp->n_off + n] = -1;
            if (pp->needs_starts) {
                saltus_real *ck = ws->checkpoints + (size_t)step * plan->ck_stride + pp->ck_off;
                for (i = 0; i < pp->n * pp->S; i++) ck[i] = ws->x[pp->x_off + i];
            }
            if (p == lp && loss->kind == SALTUS_LOSS_CE_MAX && step == 0)
                for (n = 0; n < pp->n; n++) ws->grid_values[n] = ws->x[pp->x_off + (size_t)n * pp->S + c.ls];
        }
        if (step == 0) {
            rc = fw_jump_fired(&c, 0, 0);
            if (rc) return rc;
        }
        for (;;) {
            saltus_real tArr = ws->n_queue > 0 && ws->queue[0].time < tEnd ? ws->queue[0].time : SALTUS_INF;
            saltus_real best = SALTUS_INF, s, e;
            int bestPop = -1, bestN = -1;
            for (p = 0; p < net->n_populations; p++) {
                const saltus_model *M = net->populations[p].model;
                if (!M || !M->has_guard) continue;
                e = queue_next_into(net, ws, p);
                if (tEnd < e) e = tEnd;
                for (n = 0; n < plan->pops[p].n; n++) {
                    s = fw_crossing(&c, p, n, e);
                    if (s < best) { best = s; bestPop = p; bestN = n; }
                }
            }
            {
                /* the first end of a quiet period in this step (before spikes and arrivals at its instant) */
                saltus_real tQ = SALTUS_INF;
                int qP = -1, qN = -1;
                for (p = 0; p < net->n_populations; p++) {
                    if (!(plan->pops[p].qdur > 0)) continue;
                    for (n = 0; n < plan->pops[p].n; n++)
                        if (ws->qend[plan->pops[p].n_off + n] < tQ) { tQ = ws->qend[plan->pops[p].n_off + n]; qP = p; qN = n; }
                }
                if (qP >= 0 && tQ < tEnd && tQ <= tArr && tQ <= best) {
                    const saltus_pop_plan *pp = &plan->pops[qP];
                    const saltus_model *M = net->populations[qP].model;
                    saltus_event *E;
                    int kq = pp->n_off + qN, ev = (int)ws->n_events, S = pp->S;
                    fw_advance(&c, qP, qN, tQ);
                    rc = reserve_events(ws, ws->n_events + 1);
                    if (!rc) rc = reserve_xbuf(ws, ws->n_xbuf + (size_t)S);
                    if (rc) return fw_fail(ws, rc, -1, -1, -1, 0);
                    E = &ws->events[ws->n_events++];
                    E->kind = 2;
                    E->step = step;
                    E->time = tQ;
                    E->pop = qP;
                    E->neuron = qN;
                    E->first = -1;
                    E->start = ws->start[kq];
                    E->projection = E->source = -1;
                    E->cause = ws->qcause[kq];
                    E->by_jump = -2;
                    E->x_at = ws->n_xbuf;
                    E->s_at = (size_t)-1;
                    for (i = 0; i < S; i++) ws->xbuf[ws->n_xbuf + (size_t)i] = ws->x[pp->x_off + (size_t)qN * S + i];
                    ws->n_xbuf += (size_t)S;
                    ws->qend[kq] = SALTUS_INF;
                    ws->qcause[kq] = -1;
                    ws->start[kq] = ev;
                    /* the guard it has now is the reference of a jump at this instant */
                    if (M->has_guard && tQ == ws->inst && !isnan(ws->jref[kq]))
                        ws->jref[kq] = SALTUS_CALL(M, guard, ws->x + pp->x_off + (size_t)qN * S, net->populations[qP].params, tQ);
                    continue;
                }
            }
            if (bestPop >= 0 && best <= tArr) {
                fw_advance(&c, bestPop, bestN, best);
                rc = fw_emit(&c, bestPop, bestN, best, step, -2);
                if (rc) return rc;
                continue;
            }
            if (tArr == SALTUS_INF) break;
            {
                saltus_pending arr = queue_pop(ws);
                const saltus_projection *pr = &net->projections[arr.projection];
                int q = pr->to, self = pr->from == pr->to, from_size = net->populations[pr->from].size;
                const saltus_pop_plan *pp = &plan->pops[q];
                const saltus_model *M = net->populations[q].model;
                const saltus_real *par = net->populations[q].params;
                saltus_real *y = c.t.v[V_Y2], *x;
                saltus_event *E;
                int ev = (int)ws->n_events, S = pp->S;
                /* with delays: only the neurons this arrival reaches */
#define SALTUS_REACHES(n) (arr.targeted ? saltus_is_target(net, pr, n, arr.source, arr.delay) : 1)
                for (n = 0; n < pp->n; n++) if (SALTUS_REACHES(n)) fw_advance(&c, q, n, arr.time);
                fw_open_instant(&c, arr.time);
                fw_touch(&c, q);
                if (arr.targeted) { for (n = 0; n < pp->n; n++) if (SALTUS_REACHES(n)) ws->jlastn[pp->n_off + n] = ev; }
                else ws->jlast[q] = ev;
                rc = reserve_events(ws, ws->n_events + 1);
                if (!rc) rc = reserve_xbuf(ws, ws->n_xbuf + (size_t)pp->n * S);
                if (!rc && pp->needs_starts) rc = reserve_sbuf(ws, ws->n_sbuf + (size_t)pp->n);
                if (!rc && arr.targeted) rc = reserve_Tn(ws, ws->n_tn + (size_t)pp->n);
                if (rc) return fw_fail(ws, rc, -1, -1, -1, 0);
                E = &ws->events[ws->n_events++];
                E->kind = 0;
                E->step = step;
                E->time = arr.time;
                E->pop = q;
                E->projection = arr.projection;
                E->source = arr.source;
                E->cause = arr.cause;
                E->neuron = E->first = E->start = -1;
                E->by_jump = -2;
                E->targeted = arr.targeted;
                E->delay = arr.delay;
                E->tn_at = ws->n_tn;
                if (arr.targeted) ws->n_tn += (size_t)pp->n;
                E->x_at = ws->n_xbuf;
                for (i = 0; i < pp->n * S; i++) ws->xbuf[ws->n_xbuf + (size_t)i] = ws->x[pp->x_off + (size_t)i];
                ws->n_xbuf += (size_t)pp->n * S;
                if (pp->needs_starts) {
                    E->s_at = ws->n_sbuf;
                    for (n = 0; n < pp->n; n++) ws->sbuf[ws->n_sbuf + (size_t)n] = ws->start[pp->n_off + n];
                    ws->n_sbuf += (size_t)pp->n;
                } else E->s_at = (size_t)-1;
                for (n = 0; n < pp->n; n++) {
                    if (!SALTUS_REACHES(n)) continue;
                    if (!(self && n == arr.source)) {
                        x = ws->x + pp->x_off + (size_t)n * S;
                        SALTUS_CALL_IN(M, pr->receptor, jump, x, par, arr.time, pr->weights[(size_t)n * from_size + arr.source], y);
                        for (i = 0; i < S; i++) x[i] = y[i];
                    }
                    ws->start[pp->n_off + n] = ev;
                }
#undef SALTUS_REACHES
                rc = fw_jump_fired(&c, arr.time, step);
                if (rc) return rc;
            }
        }
        for (p = 0; p < net->n_populations; p++) {
            const saltus_pop_plan *pp = &plan->pops[p];
            if (!net->populations[p].model) continue;
            for (n = 0; n < pp->n; n++) fw_advance(&c, p, n, tEnd);
            for (n = 0; n < pp->n; n++) ws->tau[pp->n_off + n] = tEnd;
            if (p == lp && loss->kind == SALTUS_LOSS_CE_MAX)
                for (n = 0; n < pp->n; n++) ws->grid_values[(size_t)(step + 1) * nl + n] = ws->x[pp->x_off + (size_t)n * pp->S + c.ls];
            for (i = 0; i < pp->n * pp->S; i++)
                if (!isfinite(ws->x[pp->x_off + (size_t)i])) return fw_fail(ws, SALTUS_E_NOT_FINITE, p, i / pp->S, i % pp->S, tEnd);
        }
    }

    /* the loss of this trial */
    if (loss->kind == SALTUS_LOSS_STATE_INTEGRAL) ws->loss = ws->integral;
    else if (loss->kind == SALTUS_LOSS_SPIKE_TIME) {
        for (n = 0; n < nl; n++) {
            saltus_real v = ws->loss_values[n];
            if (isfinite(v)) ws->loss += SALTUS_R(0.5) * ((v - loss->target[n]) * (v - loss->target[n]));
        }
    } else {
        saltus_real zmax = -SALTUS_INF, sum = 0, z, v, cn;
        int label = tr->label;
        if (loss->kind == SALTUS_LOSS_CE_MAX) {
            for (n = 0; n < nl; n++) {
                saltus_real m = -SALTUS_INF;
                int at = 0;
                for (k = 0; k <= plan->steps; k++) {
                    v = ws->grid_values[(size_t)k * nl + n];
                    if (v > m) { m = v; at = k; }
                }
                ws->loss_values[n] = m;
                ws->argmax[n] = at;
            }
        }
#define SALTUS_Z(n) (loss->kind == SALTUS_LOSS_CE_FIRST_SPIKE \
        ? -(isfinite(ws->loss_values[n]) ? ws->loss_values[n] : net->duration) / loss->tau : ws->loss_values[n])
        for (n = 0; n < nl; n++) { z = SALTUS_Z(n); if (z > zmax) zmax = z; }
        for (n = 0; n < nl; n++) sum += SALTUS_EXP(SALTUS_Z(n) - zmax);
        ws->loss = SALTUS_LOG(sum) + zmax - SALTUS_Z(label);
        for (n = 0; n < nl; n++) {
            cn = SALTUS_EXP(SALTUS_Z(n) - zmax) / sum - (n == label ? SALTUS_R(1) : SALTUS_R(0));
            if (loss->kind == SALTUS_LOSS_CE_FIRST_SPIKE) cn = isfinite(ws->loss_values[n]) ? -cn / loss->tau : SALTUS_R(0);
            ws->loss_coef[n] = cn;
        }
#undef SALTUS_Z
    }
    if (!isfinite(ws->loss)) return fw_fail(ws, SALTUS_E_LOSS, -1, -1, -1, 0);
    return SALTUS_OK;
}

/* ---- backward ---- */

/* dL/d(time of event ev) += x from neuron n; a targeted arrival keeps it per neuron too (the delay gradients). */
SALTUS_HD static void bw_add_T(saltus_trial_ws *ws, int ev, int n, saltus_real x)
{
    const saltus_event *E = &ws->events[ev];
    ws->T[ev] += x;
    if (E->kind == 0 && E->targeted) ws->Tn[E->tn_at + (size_t)n] += x;
}

/* The state of neuron n right after logged event `ref` (it jumped there, or not). */
SALTUS_HD static void bw_post_state(saltus_ctx *c, int p, int n, int ref, saltus_real *out)
{
    const saltus_event *E = &c->ws->events[ref];
    const saltus_model *M = c->net->populations[p].model;
    const saltus_real *par = c->net->populations[p].params;
    int S = c->plan->pops[p].S, i;
    if (E->kind == 2) {
        for (i = 0; i < S; i++) out[i] = c->ws->xbuf[E->x_at + (size_t)i];
    } else if (E->kind == 1) {
        SALTUS_CALL(M, spike_jump, c->ws->xbuf + E->x_at, par, E->time, out);
    } else {
        const saltus_projection *pr = &c->net->projections[E->projection];
        const saltus_real *xp = c->ws->xbuf + E->x_at + (size_t)n * S;
        if (E->targeted ? !saltus_is_target(c->net, pr, n, E->source, E->delay) : pr->from == pr->to && n == E->source) { for (i = 0; i < S; i++) out[i] = xp[i]; }
        else SALTUS_CALL_IN(M, pr->receptor, jump, xp, par, E->time, pr->weights[(size_t)n * c->net->populations[pr->from].size + E->source], out);
    }
}

/* Segment start (time, state) of neuron n: the grid point of `step` (ref -1) or the logged event ref. */
SALTUS_HD static saltus_real bw_start_of(saltus_ctx *c, int p, int n, int ref, int step, saltus_real *xa)
{
    const saltus_pop_plan *pp = &c->plan->pops[p];
    int i;
    if (ref < 0) {
        const saltus_real *ck = c->ws->checkpoints + (size_t)step * c->plan->ck_stride + pp->ck_off + (size_t)n * pp->S;
        for (i = 0; i < pp->S; i++) xa[i] = ck[i];
        return (saltus_real)((double)step * c->plan->dt);
    }
    bw_post_state(c, p, n, ref, xa);
    return c->ws->events[ref].time;
}

/* The flow of neuron n's mode (quiet or normal) into f. */
SALTUS_HD static void bw_flow(saltus_ctx *c, int p, int n, const saltus_real *x, saltus_real t, saltus_real *f)
{
    const saltus_model *M = c->net->populations[p].model;
    if (c->ws->qmode[c->plan->pops[p].n_off + n]) SALTUS_CALL(M, quiet_flow, x, c->net->populations[p].params, t, f);
    else SALTUS_CALL(M, flow, x, c->net->populations[p].params, t, f);
}

SALTUS_HD static saltus_real bw_flow_dot(saltus_ctx *c, int p, int n, const saltus_real *x, saltus_real t, const saltus_real *lam)
{
    saltus_real *f = c->t.kb, s = 0;
    int i;
    bw_flow(c, p, n, x, t, f);
    for (i = 0; i < c->plan->pops[p].S; i++) s += lam[i] * f[i];
    return s;
}

/* dl/dX and the loss density l at X (integral losses). */
SALTUS_HD static saltus_real bw_dl(saltus_ctx *c, int n, saltus_real X)
{
    const saltus_loss *loss = &c->net->loss;
    return loss->kind == SALTUS_LOSS_STATE_INTEGRAL ? X - loss->target[n] : c->ws->loss_coef[n];
}

SALTUS_HD static saltus_real bw_l(saltus_ctx *c, int n, saltus_real X)
{
    const saltus_loss *loss = &c->net->loss;
    return loss->kind == SALTUS_LOSS_STATE_INTEGRAL ? SALTUS_R(0.5) * ((X - loss->target[n]) * (X - loss->target[n])) : c->ws->loss_coef[n] * X;
}

SALTUS_HD static int bw_loss_here(saltus_ctx *c, int p)
{
    return c->plan->integral && p == c->lp;
}

/* lambda(b-) -> lambda(a+) across neuron n's segment [a, cur] started at `ref` in `step`. */
SALTUS_NOINLINE SALTUS_HD static void bw_segment(saltus_ctx *c, int p, int n, saltus_real a, int ref, int step)
{
    const saltus_pop_plan *pp = &c->plan->pops[p];
    saltus_trial_ws *ws = c->ws;
    saltus_tmp *t = &c->t;
    int S = pp->S, i, q;
    saltus_real *lam = ws->lam + pp->x_off + (size_t)n * S, *grads = ws->grad + pp->g_off;
    saltus_real *lamEnd = t->v[V_LAMEND], *lamStart = t->v[V_LAMSTART], *xa = t->v[V_XA];
    saltus_real h = ws->cur[pp->n_off + n] - a, startT = 0, dh, da, qh, qa, u, w, X;
    saltus_seg g;
    seg_of_mode(c, p, ws->qmode[pp->n_off + n], &g);
    for (i = 0; i < S; i++) lamEnd[i] = lam[i];
    if (pp->needs_starts) {
        bw_start_of(c, p, n, ref, step, xa);
        seg_vjp(&g, xa, a, h, lamEnd, lamStart, grads, &dh, &da, t);
        startT = da - dh;
        if (bw_loss_here(c, p) && h > 0) {
            saltus_real *y = t->v[V_Y2], *src = t->v[V_SRC], *back = t->v[V_BACK];
            for (q = 0; q < 3; q++) {
                u = saltus_gauss_node(q) * h;
                w = saltus_gauss_weight(q);
                seg_apply(&g, xa, a, u, y, t);
                X = y[c->ls];
                for (i = 0; i < S; i++) src[i] = 0;
                src[c->ls] = h * w * bw_dl(c, n, X);
                seg_vjp(&g, xa, a, u, src, back, grads, &qh, &qa, t);
                for (i = 0; i < S; i++) lamStart[i] += back[i];
                startT += qa - saltus_gauss_node(q) * qh - w * bw_l(c, n, X);
            }
        }
    } else {
        saltus_real *zero = t->v[V_ZERO];
        for (i = 0; i < S; i++) zero[i] = 0;
        seg_vjp(&g, zero, a, h, lamEnd, lamStart, grads, &dh, &da, t);
        if (ref >= 0) {
            saltus_real *post = t->v[V_POST];
            bw_post_state(c, p, n, ref, post);
            startT = -bw_flow_dot(c, p, n, post, a, lamStart);
        }
    }
    if (ref >= 0) bw_add_T(ws, ref, n, startT);
    for (i = 0; i < S; i++) lam[i] = lamStart[i];
    ws->cur[pp->n_off + n] = a;
}

/* dL/d(end time) of neuron n's segment ending at logged event e (started at ref) for lambda(e-) =
 * lamEnd; and dG/dh there into rate (when rate). */
SALTUS_NOINLINE SALTUS_HD static saltus_real bw_end_term(saltus_ctx *c, int p, int n, int e, int ref, const saltus_real *lamEnd, saltus_real *rate)
{
    const saltus_pop_plan *pp = &c->plan->pops[p];
    const saltus_event *E = &c->ws->events[e];
    saltus_tmp *t = &c->t;
    int S = pp->S, q;
    saltus_real a, h, s, dh, da, X, *xa = t->v[V_XA2];
    saltus_seg g;
    if (!pp->needs_starts) {
        const saltus_real *xPre = c->ws->xbuf + E->x_at + (E->kind == 0 ? (size_t)n * S : 0);
        if (rate) bw_flow(c, p, n, xPre, E->time, rate);
        return bw_flow_dot(c, p, n, xPre, E->time, lamEnd);
    }
    seg_of_mode(c, p, c->ws->qmode[pp->n_off + n], &g);
    a = bw_start_of(c, p, n, ref, E->step, xa);
    h = E->time - a;
    seg_vjp(&g, xa, a, h, lamEnd, t->v[V_OUT2], (saltus_real *)0, &dh, &da, t);
    s = dh;
    if (rate) seg_apply_rate(&g, xa, a, h, t->v[V_Y2], rate, t);
    if (bw_loss_here(c, p) && h > 0) {
        saltus_real *y = t->v[V_Y2], *r = t->v[V_R2];
        for (q = 0; q < 3; q++) {
            seg_apply_rate(&g, xa, a, saltus_gauss_node(q) * h, y, r, t);
            X = y[c->ls];
            s += saltus_gauss_weight(q) * (bw_l(c, n, X) + h * saltus_gauss_node(q) * bw_dl(c, n, X) * r[c->ls]);
        }
    }
    return s;
}

SALTUS_HD int saltus_trial_backward(const saltus_network *net, const saltus_plan *plan, int b, saltus_trial_ws *ws,
                                    saltus_real *gW, saltus_real *gP, saltus_real *gD)
{
    const saltus_loss *loss = &net->loss;
    saltus_ctx c;
    int p, n, i, q, step, e, rc, lp = loss->population;
    (void)b;
    c.net = net;
    c.plan = plan;
    c.ws = ws;
    c.lp = lp;
    c.ls = loss->state;
    saltus_carve(&c.t, plan, ws->scratch);
    rc = reserve_T(ws, ws->n_events + 1);
    if (rc) return fw_fail(ws, rc, -1, -1, -1, 0);
    if (!rc) rc = reserve_Tn(ws, ws->n_tn + 1);
    if (rc) return fw_fail(ws, rc, -1, -1, -1, 0);
    for (i = 0; i < (int)ws->n_events; i++) ws->T[i] = 0;
    for (i = 0; i < (int)ws->n_tn; i++) ws->Tn[i] = 0;
    for (i = 0; i < (int)plan->x_total; i++) ws->lam[i] = 0;
    for (i = 0; i < plan->g_total; i++) ws->grad[i] = 0;
    for (i = 0; i < plan->n_total; i++) ws->qmode[i] = ws->qend[i] < SALTUS_INF; /* the modes at the end of the run */

    e = (int)ws->n_events - 1;
    for (step = plan->steps - 1; step >= 0; step--) {
        saltus_real tEnd = step == plan->steps - 1 ? net->duration : (saltus_real)((double)(step + 1) * plan->dt);
        for (p = 0; p < net->n_populations; p++) {
            const saltus_pop_plan *pp = &plan->pops[p];
            if (!net->populations[p].model) continue;
            for (n = 0; n < pp->n; n++) ws->cur[pp->n_off + n] = tEnd;
            if (p == lp && loss->kind == SALTUS_LOSS_CE_MAX)
                for (n = 0; n < pp->n; n++) if (ws->argmax[n] == step + 1) ws->lam[pp->x_off + (size_t)n * pp->S + c.ls] += ws->loss_coef[n];
        }
        for (; e >= 0 && ws->events[e].step == step; e--) {
            const saltus_event *E = &ws->events[e];
            const saltus_pop_plan *pp = &plan->pops[E->pop];
            const saltus_model *M = net->populations[E->pop].model;
            const saltus_real *par = net->populations[E->pop].params;
            saltus_real *kb = c.t.kb, *lampost = c.t.v[V_LAMPOST];
            int S = pp->S, G = pp->G;
            if (E->kind == 0) {
                const saltus_projection *pr = &net->projections[E->projection];
                int self = pr->from == pr->to, from_size = net->populations[pr->from].size;
                for (n = 0; n < pp->n; n++) {
                    saltus_real *lam = ws->lam + pp->x_off + (size_t)n * S;
                    if (E->targeted && !saltus_is_target(net, pr, n, E->source, E->delay)) continue;
                    bw_segment(&c, E->pop, n, E->time, e, step);
                    if (!(self && n == E->source)) {
                        size_t wi = (size_t)n * from_size + E->source;
                        for (i = 0; i < S; i++) lampost[i] = lam[i];
                        SALTUS_CALL_IN(M, pr->receptor, vjp, ws->xbuf + E->x_at + (size_t)n * S, par, E->time, pr->weights[wi], lampost, kb);
                        gW[plan->w_off[E->projection] + wi] += kb[S + 1 + G];
                        bw_add_T(ws, e, n, kb[S]);
                        for (q = 0; q < G; q++) ws->grad[pp->g_off + q] += kb[S + 1 + q];
                        for (i = 0; i < S; i++) lam[i] = kb[i];
                    }
                    bw_add_T(ws, e, n, bw_end_term(&c, E->pop, n, e, pp->needs_starts ? ws->sbuf[E->s_at + (size_t)n] : -1, lam, (saltus_real *)0));
                }
                if (E->cause >= 0) ws->T[E->cause] += ws->T[e];
                if (E->targeted && gD)
                    for (n = 0; n < pp->n; n++)
                        if (saltus_is_target(net, pr, n, E->source, E->delay))
                            gD[plan->w_off[E->projection] + (size_t)n * from_size + E->source] += ws->Tn[E->tn_at + (size_t)n];
            } else if (E->kind == 2) {
                /* the end of a quiet period: no jump, lambda unchanged; its time moves with its spike */
                n = E->neuron;
                bw_segment(&c, E->pop, n, E->time, e, step);
                ws->qmode[pp->n_off + n] = 1;
                ws->T[e] += bw_end_term(&c, E->pop, n, e, E->start, ws->lam + pp->x_off + (size_t)n * S, (saltus_real *)0);
                ws->T[E->cause] += ws->T[e];
                SALTUS_CALL(M, quiet_duration, par, kb);
                for (q = 0; q < G; q++) ws->grad[pp->g_off + q] += ws->T[e] * kb[1 + q];
            } else {
                saltus_real *lam, *mu = c.t.v[V_MU], *rate = c.t.v[V_RATE2], D, gdot, phi;
                n = E->neuron;
                lam = ws->lam + pp->x_off + (size_t)n * S;
                bw_segment(&c, E->pop, n, E->time, e, step);
                if (pp->qdur > 0) ws->qmode[pp->n_off + n] = 0; /* before a spike that started a quiet period: the normal mode */
                for (i = 0; i < S; i++) lampost[i] = lam[i];
                SALTUS_CALL(M, spike_vjp, ws->xbuf + E->x_at, par, E->time, lampost, kb);
                for (i = 0; i < S; i++) mu[i] = kb[i];
                ws->T[e] += kb[S];
                for (q = 0; q < G; q++) ws->grad[pp->g_off + q] += kb[S + 1 + q];
                if (E->pop == lp && E->first) {
                    if (loss->kind == SALTUS_LOSS_SPIKE_TIME) ws->T[e] += E->time - loss->target[n];
                    if (loss->kind == SALTUS_LOSS_CE_FIRST_SPIKE) ws->T[e] += ws->loss_coef[n];
                }
                D = ws->T[e] + bw_end_term(&c, E->pop, n, e, E->start, mu, rate);
                if (E->by_jump != -2) {
                    /* fired by a jump: its time is its arrival's; D goes there, no phi */
                    if (E->by_jump >= 0) bw_add_T(ws, E->by_jump, n, D);
                    for (i = 0; i < S; i++) lam[i] = mu[i];
                    continue;
                }
                SALTUS_CALL(M, guard_grad, ws->xbuf + E->x_at, par, E->time, kb);
                gdot = kb[S];
                for (i = 0; i < S; i++) gdot += kb[i] * rate[i];
                phi = -D / gdot;
                for (i = 0; i < S; i++) lam[i] = mu[i] + phi * kb[i];
                for (q = 0; q < G; q++) ws->grad[pp->g_off + q] += phi * kb[S + 1 + q];
            }
        }
        for (p = 0; p < net->n_populations; p++) {
            if (!net->populations[p].model) continue;
            for (n = 0; n < plan->pops[p].n; n++) bw_segment(&c, p, n, (saltus_real)((double)step * plan->dt), -1, step);
        }
    }
    for (i = 0; i < plan->g_total; i++) gP[i] += ws->grad[i];
    return SALTUS_OK;
}

/* ---- host: checks, sizes, messages, every trial ---- */

#define SALTUS_FAIL(...) do { snprintf(err, cap, __VA_ARGS__); saltus_plan_free(plan); return -1; } while (0)

int saltus_plan_make(const saltus_network *net, double dt, long max_spikes, double max_bytes, saltus_plan *plan, char *err, size_t cap)
{
    int p, j, b, k, S, lossPop;
    size_t x = 0, ck = 0, w = 0;
    int nn = 0, g = 0;
    double steps, bytes;
    memset(plan, 0, sizeof *plan);
    if (!(net->duration > 0) || !isfinite(net->duration)) SALTUS_FAIL("duration: must be a positive number of seconds; got %g", (double)net->duration);
    if (!(dt > 0) || !isfinite(dt)) SALTUS_FAIL("dt: must be a positive number of seconds; got %g", dt);
    steps = ceil((double)net->duration / dt - 1e-9);
    if (steps < 1) steps = 1;
    if (steps > 1e9) SALTUS_FAIL("dt: %g s gives %.0f steps over %g s; use a larger dt or a shorter duration", dt, steps, (double)net->duration);
    if (net->n_populations < 1) SALTUS_FAIL("populations: at least one population is needed");
    if (net->n_trials < 1) SALTUS_FAIL("trials: at least one trial is needed");
    plan->dt = dt;
    plan->steps = (int)steps;
    plan->n_populations = net->n_populations;
    plan->max_spikes = max_spikes > 0 ? max_spikes : 100000;
    plan->pops = (saltus_pop_plan *)calloc((size_t)net->n_populations, sizeof(saltus_pop_plan));
    plan->w_off = (size_t *)calloc((size_t)net->n_projections + 1, sizeof(size_t));
    if (!plan->pops || !plan->w_off) SALTUS_FAIL("out of memory");
    lossPop = net->loss.population;
    if (lossPop < 0 || lossPop >= net->n_populations || !net->populations[lossPop].model) SALTUS_FAIL("loss.population: not a model population");
    plan->integral = net->loss.kind == SALTUS_LOSS_STATE_INTEGRAL || net->loss.kind == SALTUS_LOSS_CE_INTEGRAL;
    plan->max_S = 1;
    for (p = 0; p < net->n_populations; p++) {
        const saltus_population *P = &net->populations[p];
        const saltus_model *M = P->model;
        saltus_pop_plan *pp = &plan->pops[p];
        if (P->size < 1) SALTUS_FAIL("populations.%s.size: must be a whole number >= 1", P->name);
        for (j = 0; j < p; j++) if (strcmp(net->populations[j].name, P->name) == 0) SALTUS_FAIL("populations[%d]: the name %s is used twice", p, P->name);
        pp->n = P->size;
        if (!M) continue;
        for (k = 0; k < M->n_params; k++)
            if (!isfinite(P->params[k])) SALTUS_FAIL("populations.%s.params.%s: no finite value", P->name, M->param_names[k]);
        for (k = 0; k < M->n_states; k++)
            if (!isfinite(P->initial[k])) SALTUS_FAIL("populations.%s.initial.%s: must be a finite number", P->name, M->state_names[k]);
        S = M->n_states;
        pp->S = S;
        pp->G = M->n_grad;
        pp->m = 1;
        if (!M->exact) while (pp->m < SALTUS_MAX_SUBSTEPS && M->rate * dt / pp->m > SALTUS_SUBSTEP_RATE_BOUND) pp->m *= 2;
        pp->needs_starts = !M->exact || M->state_dependent || (p == lossPop && plan->integral);
        if (M->has_quiet) {
            /* the quiet mode: its own sub-steps, and the duration for these parameter values */
            saltus_real *dq = (saltus_real *)calloc((size_t)M->n_grad + 1, sizeof(saltus_real));
            if (!dq) SALTUS_FAIL("out of memory");
            SALTUS_CALL(M, quiet_duration, P->params, dq);
            pp->qdur = dq[0];
            free(dq);
            if (!(pp->qdur >= 0)) SALTUS_FAIL("populations.%s: the quiet period of %s lasts %g s; a duration must not be negative (0: no quiet period)", P->name, M->name, (double)pp->qdur);
            pp->mq = 1;
            if (!M->quiet_exact) while (pp->mq < SALTUS_MAX_SUBSTEPS && M->quiet_rate * dt / pp->mq > SALTUS_SUBSTEP_RATE_BOUND) pp->mq *= 2;
            if (!M->quiet_exact || M->quiet_state_dependent) pp->needs_starts = 1;
        }
        pp->x_off = x;
        pp->n_off = nn;
        pp->g_off = g;
        pp->ck_off = ck;
        x += (size_t)P->size * S;
        nn += P->size;
        g += M->n_grad;
        if (pp->needs_starts) ck += (size_t)P->size * S;
        if (S > plan->max_S) plan->max_S = S;
        if (M->n_grad > plan->max_G) plan->max_G = M->n_grad;
    }
    plan->x_total = x;
    plan->n_total = nn;
    plan->g_total = g;
    plan->ck_stride = ck;
    for (j = 0; j < net->n_projections; j++) {
        const saltus_projection *pr = &net->projections[j];
        const saltus_population *from, *to;
        if (pr->from < 0 || pr->from >= net->n_populations) SALTUS_FAIL("projections[%d].from: no such population", j);
        if (pr->to < 0 || pr->to >= net->n_populations) SALTUS_FAIL("projections[%d].to: no such population", j);
        from = &net->populations[pr->from];
        to = &net->populations[pr->to];
        if (!to->model) SALTUS_FAIL("projections[%d].to: %s is an input population", j, to->name);
        if (!to->model->has_incoming) SALTUS_FAIL("projections[%d].to: %s has no incoming block", j, to->model->name);
        if (pr->receptor < 0 || pr->receptor >= to->model->has_incoming)
            SALTUS_FAIL("projections[%d].receptor: %s has no incoming block number %d", j, to->model->name, pr->receptor);
        if (from->model && !from->model->has_guard) SALTUS_FAIL("projections[%d].from: %s never fires", j, from->model->name);
        for (k = 0; k < to->size * from->size; k++)
            if (!isfinite(pr->weights[k])) SALTUS_FAIL("projections[%d].weights: every weight must be a finite number", j);
        if (pr->delays)
            for (k = 0; k < to->size * from->size; k++)
                if (!(pr->delays[k] >= 0) || !isfinite(pr->delays[k])) SALTUS_FAIL("projections[%d].delay_s: every delay must be a finite time >= 0", j);
        plan->w_off[j] = w;
        w += (size_t)to->size * from->size;
    }
    plan->w_off[net->n_projections] = w;
    plan->w_total = w;
    for (b = 0; b < net->n_trials; b++) {
        const saltus_trial *tr = &net->trials[b];
        for (k = 0; k < tr->n_inputs; k++) {
            int ip = tr->input_pop[k];
            if (ip < 0 || ip >= net->n_populations || net->populations[ip].model) SALTUS_FAIL("trials[%d].inputs: spike %d is not for an input population", b, k);
            if (!(tr->input_time[k] >= 0 && tr->input_time[k] < net->duration))
                SALTUS_FAIL("trials[%d].inputs.%s: time %g s is outside [0, duration)", b, net->populations[ip].name, (double)tr->input_time[k]);
            if (tr->input_index[k] < 0 || tr->input_index[k] >= net->populations[ip].size)
                SALTUS_FAIL("trials[%d].inputs.%s: index %d is out of range", b, net->populations[ip].name, tr->input_index[k]);
        }
    }
    {
        const saltus_loss *l = &net->loss;
        const saltus_model *M = net->populations[lossPop].model;
        plan->n_loss = net->populations[lossPop].size;
        plan->n_grid = l->kind == SALTUS_LOSS_CE_MAX ? plan->n_loss : 0;
        if ((l->kind == SALTUS_LOSS_STATE_INTEGRAL || l->kind == SALTUS_LOSS_CE_INTEGRAL || l->kind == SALTUS_LOSS_CE_MAX)
            && (l->state < 0 || l->state >= M->n_states)) SALTUS_FAIL("loss.state: %s has no such state", M->name);
        if ((l->kind == SALTUS_LOSS_SPIKE_TIME || l->kind == SALTUS_LOSS_CE_FIRST_SPIKE) && !M->has_guard) SALTUS_FAIL("loss.population: %s never fires", M->name);
        if (l->kind < SALTUS_LOSS_STATE_INTEGRAL || l->kind > SALTUS_LOSS_CE_FIRST_SPIKE) SALTUS_FAIL("loss.kind: unknown kind");
        if (l->kind == SALTUS_LOSS_CE_FIRST_SPIKE && !(l->tau > 0)) SALTUS_FAIL("loss.tau_s: must be a positive time");
        if (l->kind >= SALTUS_LOSS_CE_INTEGRAL)
            for (b = 0; b < net->n_trials; b++)
                if (net->trials[b].label < 0 || net->trials[b].label >= plan->n_loss)
                    SALTUS_FAIL("trials[%d].label: a classification loss needs a label in 0..%d", b, plan->n_loss - 1);
    }
    bytes = (double)saltus_ws_reals(plan) * sizeof(saltus_real) + (double)saltus_ws_ints(plan) * sizeof(int);
    if (max_bytes > 0 && bytes * net->n_trials > max_bytes)
        SALTUS_FAIL("the network needs %.0f MB (%d trials of %.1f MB, mostly the state at %d grid points kept for the backward pass) at dt = %g s, "
                    "more than the limit of %.0f MB: use a larger dt, a shorter duration or fewer trials per run",
                    bytes * net->n_trials / 1e6, net->n_trials, bytes / 1e6, plan->steps, dt, max_bytes / 1e6);
    return 0;
}

void saltus_plan_free(saltus_plan *plan)
{
    free(plan->pops);
    free(plan->w_off);
    plan->pops = 0;
    plan->w_off = 0;
}

void saltus_trial_message(const saltus_network *net, const saltus_trial_ws *ws, const saltus_plan *plan, char *buf, size_t cap)
{
    const char *pop = ws->err_pop >= 0 ? net->populations[ws->err_pop].name : "";
    switch (ws->status) {
    case SALTUS_E_FIRED_SIDE:
        snprintf(buf, cap, "%s[%d] is on the fired side of its threshold right after its own spike at %.17g s: its spike jump must leave it below the threshold",
                 pop, ws->err_neuron, (double)ws->err_time);
        break;
    case SALTUS_E_JUMP_LOOP:
        snprintf(buf, cap, "%s[%d] is carried across its threshold a second time at %.17g s by spikes fired at that same instant: a loop of spikes fired by jumps; stopped",
                 pop, ws->err_neuron, (double)ws->err_time);
        break;
    case SALTUS_E_SPIKES:
        snprintf(buf, cap, "more than %ld spikes: stopped (check the weights' units)", plan->max_spikes);
        break;
    case SALTUS_E_NOT_FINITE:
        snprintf(buf, cap, "%s[%d].%s is not finite at t = %.17g s", pop, ws->err_neuron,
                 net->populations[ws->err_pop].model->state_names[ws->err_state], (double)ws->err_time);
        break;
    case SALTUS_E_LOSS:
        snprintf(buf, cap, "the loss is not finite (%g): the simulation diverged or produced NaN", (double)ws->loss);
        break;
    case SALTUS_E_CAPACITY:
        snprintf(buf, cap, "a workspace of fixed capacity is full (too many events)");
        break;
    case SALTUS_E_MEMORY:
        snprintf(buf, cap, "out of memory");
        break;
    default:
        snprintf(buf, cap, "no error");
    }
}

int saltus_run(const saltus_network *net, double dt, long max_spikes, saltus_result *out, char *err, size_t cap)
{
    int b, rc;
    char msg[512];
    memset(out, 0, sizeof *out);
    if (saltus_plan_make(net, dt, max_spikes, 0, &out->plan, err, cap)) return -1;
    out->n_trials = net->n_trials;
    out->trials = (saltus_trial_ws *)calloc((size_t)net->n_trials, sizeof(saltus_trial_ws));
    out->gW = (saltus_real *)calloc(out->plan.w_total + 1, sizeof(saltus_real));
    out->gP = (saltus_real *)calloc((size_t)out->plan.g_total + 1, sizeof(saltus_real));
    out->gD = (saltus_real *)calloc(out->plan.w_total + 1, sizeof(saltus_real));
    if (!out->trials || !out->gW || !out->gP || !out->gD) { snprintf(err, cap, "out of memory"); saltus_result_free(out); return -1; }
    for (b = 0; b < net->n_trials; b++) {
        if (saltus_ws_init(&out->trials[b], &out->plan)) { snprintf(err, cap, "out of memory"); saltus_result_free(out); return -1; }
        rc = saltus_trial_forward(net, &out->plan, b, &out->trials[b]);
        if (rc) {
            saltus_trial_message(net, &out->trials[b], &out->plan, msg, sizeof msg);
            snprintf(err, cap, "trial %d: %s", b, msg);
            saltus_result_free(out);
            return -1;
        }
        out->loss += out->trials[b].loss;
    }
    for (b = 0; b < net->n_trials; b++) {
        rc = saltus_trial_backward(net, &out->plan, b, &out->trials[b], out->gW, out->gP, out->gD);
        if (rc) {
            saltus_trial_message(net, &out->trials[b], &out->plan, msg, sizeof msg);
            snprintf(err, cap, "trial %d: %s", b, msg);
            saltus_result_free(out);
            return -1;
        }
    }
    return 0;
}

void saltus_result_free(saltus_result *r)
{
    int b;
    if (r->trials) for (b = 0; b < r->n_trials; b++) saltus_ws_free(&r->trials[b]);
    free(r->trials);
    free(r->gW);
    free(r->gP);
    free(r->gD);
    saltus_plan_free(&r->plan);
    memset(r, 0, sizeof *r);
}
