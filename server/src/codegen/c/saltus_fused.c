/* ---- fused population steps (docs/codegen.md, "Fused population steps"): the rare path ----
 * A neuron whose guard crossed inside the step is finished here, one neuron at a time, with the
 * grid runtime's algorithms (saltus_grid.c: the segment map in m sub-steps, Newton in a shrinking
 * bracket, bisection of a flow that blows up) on this model's kernels. Kept out of line where the
 * compiler knows how, so the pass over the flags keeps its registers. */
#ifndef SALTUS_FZ_COLD
#if defined(__GNUC__)
#define SALTUS_FZ_COLD __attribute__((noinline, cold))
#else
#define SALTUS_FZ_COLD
#endif
#endif

/* G(x, a, h): the step map in m equal sub-steps. */
static void @M@_fz_seg(const saltus_real *x, const saltus_real *p, saltus_real a, saltus_real h, int m, saltus_real *out)
{
    saltus_real sub = h / (saltus_real)m, tmp[@S@];
    int s, i;
    for (i = 0; i < @S@; i++) out[i] = x[i];
    if (!(h > 0)) return;
    for (s = 0; s < m; s++) {
        @M@_map_step(out, p, a + (saltus_real)s * sub, sub, tmp);
        for (i = 0; i < @S@; i++) out[i] = tmp[i];
    }
}

/* G(x, a, u) into out and dG/du into rate. */
static void @M@_fz_seg_rate(const saltus_real *x, const saltus_real *p, saltus_real a, saltus_real u, int m, saltus_real *out, saltus_real *rate)
{
    saltus_real sub = u / (saltus_real)m, k[4 * @S@];
    int s, i;
    for (i = 0; i < @S@; i++) { out[i] = x[i]; rate[i] = 0; }
    for (s = 0; s < m; s++) {
        @M@_map_jvp(out, p, a + (saltus_real)s * sub, sub, rate, k);
        for (i = 0; i < @S@; i++) {
            out[i] = k[i];
            rate[i] = k[@S@ + i] + k[2 * @S@ + i] / (saltus_real)m + k[3 * @S@ + i] * ((saltus_real)s / (saltus_real)m);
        }
    }
}

/* lamStart = (dG/dx)^T lamEnd; grads[q] += lamEnd . dG/dp_q; *dh = lamEnd . dG/dh; *da = lamEnd . dG/da. */
static void @M@_fz_seg_vjp(const saltus_real *xa, const saltus_real *p, saltus_real a, saltus_real h, int m, const saltus_real *lamEnd,
                           saltus_real *lamStart, saltus_real *grads, saltus_real *dh, saltus_real *da)
{
    saltus_real sub = h / (saltus_real)m, lam[@S@], k[@S@ + 2 + @G@], st[SALTUS_MAX_SUBSTEPS * @S@], sh = 0, sa = 0;
    int s, i, q;
    for (i = 0; i < @S@; i++) { st[i] = xa[i]; lam[i] = lamEnd[i]; }
    for (s = 0; s < m - 1; s++) @M@_map_step(st + s * @S@, p, a + (saltus_real)s * sub, sub, st + (s + 1) * @S@);
    for (s = m - 1; s >= 0; s--) {
        @M@_map_vjp(st + s * @S@, p, a + (saltus_real)s * sub, sub, lam, k);
        sh = sh + k[@S@] / (saltus_real)m + k[@S@ + 1] * ((saltus_real)s / (saltus_real)m);
        sa = sa + k[@S@ + 1];
        for (q = 0; q < @G@; q++) grads[q] += k[@S@ + 2 + q];
        for (i = 0; i < @S@; i++) lam[i] = k[i];
    }
    for (i = 0; i < @S@; i++) lamStart[i] = lam[i];
    *dh = sh;
    *da = sa;
}

/* G(x, a, u) and dG/du: for an exact map dG/du is the flow at G (one map step and one flow instead of
 * the map's tangent), otherwise the sub-stepped tangent. */
static void @M@_fz_at(const saltus_real *x, const saltus_real *p, saltus_real a, saltus_real u, int m, saltus_real *out, saltus_real *rate)
{
    if (@EXACT@) {
        @M@_map_step(x, p, a, u, out);
        @M@_flow(out, p, a + u, rate);
    } else @M@_fz_seg_rate(x, p, a, u, m, out, rate);
}

static int @M@_fz_crossed(saltus_real g0, saltus_real g1)
{
    int up = g0 < 0 && g1 >= 0, down = g0 > 0 && g1 <= 0;
    return @DIR@ > 0 ? up : @DIR@ < 0 ? down : (up || down);
}

static saltus_real @M@_fz_guard_only(const saltus_real *x, const saltus_real *p, saltus_real a, saltus_real u, int m)
{
    saltus_real y[@S@];
    @M@_fz_seg(x, p, a, u, m, y);
    return @M@_guard(y, p, a + u);
}

/* The root u in (0, h] of the guard with g(0) = g0, g(h) = g1 of opposite signs. */
static saltus_real @M@_fz_locate(const saltus_real *x, const saltus_real *p, saltus_real a, saltus_real g0, saltus_real g1, saltus_real h, int m)
{
    saltus_real lo = 0, hi = h, glo = g0, u, gv, dg, next, au, hb, y[@S@], rate[@S@], k[@S@ + 1 + @G@];
    int it, s;
    if (g1 == 0) return h;
    u = h * g0 / (g0 - g1);
    if (!(u > lo && u < hi)) u = (saltus_real)0.5 * h;
    for (it = 0; it < 100; it++) {
        @M@_fz_at(x, p, a, u, m, y, rate);
        gv = @M@_guard(y, p, a + u);
        @M@_guard_grad(y, p, a + u, k);
        dg = k[@S@];
        for (s = 0; s < @S@; s++) dg += k[s] * rate[s];
        if (gv == 0) return u;
        if ((gv < 0) == (glo < 0)) { lo = u; glo = gv; } else hi = u;
        next = u - gv / dg;
        if (!(next > lo && next < hi) || !isfinite(next)) next = (saltus_real)0.5 * (lo + hi);
        au = SALTUS_FABS(u);
        hb = h * (saltus_real)1e-3;
        if (SALTUS_FABS(next - u) <= SALTUS_ROUNDING * (au > hb ? au : hb) || hi - lo <= SALTUS_ROUNDING * h) return next;
        u = next;
    }
    return u;
}

/* The crossing in (0, h] of the guard along a segment starting at g0, or infinity. */
static saltus_real @M@_fz_locate_crossing(const saltus_real *x, const saltus_real *p, saltus_real a, saltus_real g0, saltus_real h, int m)
{
    saltus_real g1 = @M@_fz_guard_only(x, p, a, h, m), lo = 0, hi = h, mid, gm;
    int it;
    if (isfinite(g1)) return @M@_fz_crossed(g0, g1) ? @M@_fz_locate(x, p, a, g0, g1, h, m) : (saltus_real)INFINITY;
    for (it = 0; it < 80; it++) {
        mid = (saltus_real)0.5 * (lo + hi);
        gm = @M@_fz_guard_only(x, p, a, mid, m);
        if (!isfinite(gm)) hi = mid;
        else if (@M@_fz_crossed(g0, gm)) return @M@_fz_locate(x, p, a, g0, gm, mid, m);
        else lo = mid;
    }
    return (saltus_real)INFINITY;
}

/* One flagged neuron over [t, t1]: x (S) holds its state at t after the input; on return its state at
 * t1, *ts the spike time. 1: one spike; 0: none; -1: two crossings in the step or a state that is
 * not finite (the grid runtime handles those). */
SALTUS_FZ_COLD static int @M@_fz_fix_forward(saltus_real *x, const saltus_real *p, saltus_real t, saltus_real t1, int m, saltus_real *ts)
{
    saltus_real a[@S@], b[@S@], g0 = @M@_guard(x, p, t), u, s;
    int i, fired = 0;
    u = @M@_fz_locate_crossing(x, p, t, g0, t1 - t, m);
    if (isfinite(u)) {
        s = t + u;
        @M@_fz_seg(x, p, t, s - t, m, a);
        @M@_spike_jump(a, p, s, b);
        *ts = s;
        fired = 1;
        /* the rest of the step; a second crossing there is refused */
        g0 = @M@_guard(b, p, s);
        @M@_fz_seg(b, p, s, t1 - s, m, x);
        u = @M@_guard(x, p, t1);
        if (isfinite(u) ? @M@_fz_crossed(g0, u) : isfinite(@M@_fz_locate_crossing(b, p, s, g0, t1 - s, m))) return -1;
    } else {
        @M@_fz_seg(x, p, t, t1 - t, m, a);
        for (i = 0; i < @S@; i++) x[i] = a[i];
    }
    for (i = 0; i < @S@; i++) if (!isfinite(x[i])) return -1;
    return fired;
}

/* The adjoint of one spiking neuron's step (t, spike at s, t1): lam (S) holds lambda at t1 on entry
 * and lambda at t before the input on return; gp (G) += dL/dp; *gin = dL/d(input weight). */
SALTUS_FZ_COLD static void @M@_fz_fix_backward(const saltus_real *x0, const saltus_real *p, saltus_real t, saltus_real t1, int m, saltus_real w,
                                saltus_real s, saltus_real gs, saltus_real *lam, saltus_real *gin, saltus_real *gp)
{
    saltus_real xin[@S@], a[@S@], rate[@S@], b[@S@], lb[@S@], la[@S@], gx[@S@], l1[@S@], lg[@S@], gpg[@G@ + 1];
    saltus_real k[@S@ + 2 + @G@ + 1], dh, da, Lu, slope, coef;
    int i, q;
    @M@_incoming_jump(x0, p, t, w, xin);
    @M@_fz_at(xin, p, t, s - t, m, a, rate);
    @M@_spike_jump(a, p, s, b);
    @M@_fz_seg_vjp(b, p, s, t1 - s, m, lam, lb, gp, &dh, &da);
    Lu = da - dh + gs;
    @M@_spike_vjp(a, p, s, lb, k);
    for (i = 0; i < @S@; i++) la[i] = k[i];
    Lu += k[@S@];
    for (q = 0; q < @G@; q++) gp[q] += k[@S@ + 1 + q];
    for (i = 0; i < @S@; i++) Lu += la[i] * rate[i];
    @M@_guard_grad(a, p, s, k);
    slope = k[@S@];
    for (i = 0; i < @S@; i++) { gx[i] = k[i]; slope += k[i] * rate[i]; }
    for (q = 0; q < @G@; q++) gpg[q] = k[@S@ + 1 + q];
    coef = -Lu / slope;
    /* the first segment once, for la + coef gx (its vector-Jacobian product is linear in the costate) */
    for (i = 0; i < @S@; i++) lg[i] = la[i] + coef * gx[i];
    @M@_fz_seg_vjp(xin, p, t, s - t, m, lg, l1, gp, &dh, &da);
    for (q = 0; q < @G@; q++) gp[q] += coef * gpg[q];
    @M@_incoming_vjp(x0, p, t, w, l1, k);
    for (i = 0; i < @S@; i++) lam[i] = k[i];
    for (q = 0; q < @G@; q++) gp[q] += k[@S@ + 1 + q];
    *gin = k[@S@ + 1 + @G@];
}
