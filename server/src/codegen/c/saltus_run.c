/* The runner (docs/codegen.md, "Runner"): reads a network description (NET.json: the
 * cross-check scenario format with optional trials and classification losses), runs it on the
 * grid runtime with the models above, and prints
 *   {"loss": L, "spikes": {POP: [[t, i], ...]}, "weights": [dL/dW per projection, weights[to][from]],
 *    "params": {"POP.NAME": dL/dp}}
 * and, when a projection has transmission delays, "delays": [dL/d(delay) per projection, like "weights"].
 * A projection's delays are its "delay_s" (one number, or a matrix shaped like the weights), else the
 * model file's `connect A -> B [via W] delay D` between the two populations' models into that block
 * (saltus_file_delays, written by the generator), as the cross-check takes them.
 * in SI units (trial 0's spikes; with several trials also "trials" and "spikes_per_trial").
 * Exit status: 0 printed; 1 the simulation failed (message on stderr); 2 bad arguments or a bad
 * description (one line on stderr naming the field). It reads its input with a small JSON
 * reader of its own (numbers, strings, true/false/null, arrays, objects). */
#include <math.h>
#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

/* snprintf that may cut a message short (paths and names are bounded, but not by the compiler's reckoning). */
static void fmt(char *out, size_t cap, const char *f, ...)
{
    va_list ap;
    va_start(ap, f);
    vsnprintf(out, cap, f, ap);
    va_end(ap);
}

/* ---- JSON ---- */

enum { J_NULL, J_BOOL, J_NUM, J_STR, J_ARR, J_OBJ };

typedef struct jval {
    int kind;
    double num;
    int flag;
    char *str;
    size_t n;
    struct jval *items;         /* array items, or object values */
    char **keys;                /* object keys, in file order */
} jval;

typedef struct {
    const char *s;
    size_t len, pos;
    int depth;
    char err[256];
} jparser;

#define JSON_MAX_DEPTH 64

static void jfree(jval *v)
{
    size_t i;
    if (!v) return;
    for (i = 0; i < v->n; i++) {
        if (v->items) jfree(&v->items[i]);
        if (v->keys) free(v->keys[i]);
    }
    free(v->items);
    free(v->keys);
    free(v->str);
}

static int jfail(jparser *p, const char *what)
{
    size_t i, line = 1, col = 1;
    if (p->err[0]) return -1;
    for (i = 0; i < p->pos && i < p->len; i++) {
        if (p->s[i] == '\n') { line++; col = 1; } else col++;
    }
    fmt(p->err, sizeof p->err, "not valid JSON at line %lu, column %lu: %s", (unsigned long)line, (unsigned long)col, what);
    return -1;
}

static void jspace(jparser *p)
{
    while (p->pos < p->len && (p->s[p->pos] == ' ' || p->s[p->pos] == '\t' || p->s[p->pos] == '\n' || p->s[p->pos] == '\r')) p->pos++;
}

static int jvalue(jparser *p, jval *v);

static int jhex(jparser *p, unsigned *out)
{
    unsigned u = 0;
    int k;
    if (p->pos + 4 > p->len) return jfail(p, "a \\u escape needs four hex digits");
    for (k = 0; k < 4; k++) {
        char c = p->s[p->pos++];
        u <<= 4;
        if (c >= '0' && c <= '9') u |= (unsigned)(c - '0');
        else if (c >= 'a' && c <= 'f') u |= (unsigned)(c - 'a' + 10);
        else if (c >= 'A' && c <= 'F') u |= (unsigned)(c - 'A' + 10);
        else return jfail(p, "a \\u escape needs four hex digits");
    }
    *out = u;
    return 0;
}

static int jstring(jparser *p, char **out)
{
    size_t cap = 16, n = 0;
    char *b = (char *)malloc(cap), *nb;
    p->pos++; /* the opening quote */
    if (!b) return jfail(p, "out of memory");
    for (;;) {
        unsigned char c;
        unsigned u = 0;
        char enc[4];
        int k, m = 0;
        if (p->pos >= p->len) { free(b); return jfail(p, "a string is not closed"); }
        c = (unsigned char)p->s[p->pos++];
        if (c == '"') break;
        if (c < 0x20) { free(b); p->pos--; return jfail(p, "a control character inside a string"); }
        if (c != '\\') { enc[m++] = (char)c; }
        else {
            if (p->pos >= p->len) { free(b); return jfail(p, "a string is not closed"); }
            c = (unsigned char)p->s[p->pos++];
            switch (c) {
            case '"': case '\\': case '/': enc[m++] = (char)c; break;
            case 'b': enc[m++] = '\b'; break;
            case 'f': enc[m++] = '\f'; break;
            case 'n': enc[m++] = '\n'; break;
            case 'r': enc[m++] = '\r'; break;
            case 't': enc[m++] = '\t'; break;
            case 'u':
                if (jhex(p, &u)) { free(b); return -1; }
                if (u >= 0xD800 && u <= 0xDBFF) {
                    unsigned lo;
                    if (p->pos + 2 > p->len || p->s[p->pos] != '\\' || p->s[p->pos + 1] != 'u') { free(b); return jfail(p, "a lone surrogate in a \\u escape"); }
                    p->pos += 2;
                    if (jhex(p, &lo)) { free(b); return -1; }
                    if (lo < 0xDC00 || lo > 0xDFFF) { free(b); return jfail(p, "a lone surrogate in a \\u escape"); }
                    u = 0x10000 + ((u - 0xD800) << 10) + (lo - 0xDC00);
                } else if (u >= 0xDC00 && u <= 0xDFFF) { free(b); return jfail(p, "a lone surrogate in a \\u escape"); }
                if (u == 0) { free(b); return jfail(p, "\\u0000 is not accepted in a string"); }
                if (u < 0x80) enc[m++] = (char)u;
                else if (u < 0x800) { enc[m++] = (char)(0xC0 | (u >> 6)); enc[m++] = (char)(0x80 | (u & 0x3F)); }
                else if (u < 0x10000) { enc[m++] = (char)(0xE0 | (u >> 12)); enc[m++] = (char)(0x80 | ((u >> 6) & 0x3F)); enc[m++] = (char)(0x80 | (u & 0x3F)); }
                else { enc[m++] = (char)(0xF0 | (u >> 18)); enc[m++] = (char)(0x80 | ((u >> 12) & 0x3F)); enc[m++] = (char)(0x80 | ((u >> 6) & 0x3F)); enc[m++] = (char)(0x80 | (u & 0x3F)); }
                break;
            default:
                free(b);
                p->pos--;
                return jfail(p, "an unknown escape in a string");
            }
        }
        if (n + (size_t)m + 1 > cap) {
            cap *= 2;
            nb = (char *)realloc(b, cap);
            if (!nb) { free(b); return jfail(p, "out of memory"); }
            b = nb;
        }
        for (k = 0; k < m; k++) b[n++] = enc[k];
    }
    b[n] = 0;
    *out = b;
    return 0;
}

static int jdigits(jparser *p)
{
    size_t start = p->pos;
    while (p->pos < p->len && p->s[p->pos] >= '0' && p->s[p->pos] <= '9') p->pos++;
    return p->pos > start;
}

static int jnumber(jparser *p, jval *v)
{
    size_t start = p->pos;
    char buf[64], *end;
    if (p->s[p->pos] == '-') p->pos++;
    if (p->pos < p->len && p->s[p->pos] == '0') p->pos++;
    else if (!jdigits(p)) return jfail(p, "a malformed number");
    if (p->pos < p->len && p->s[p->pos] == '.') { p->pos++; if (!jdigits(p)) return jfail(p, "a malformed number"); }
    if (p->pos < p->len && (p->s[p->pos] == 'e' || p->s[p->pos] == 'E')) {
        p->pos++;
        if (p->pos < p->len && (p->s[p->pos] == '+' || p->s[p->pos] == '-')) p->pos++;
        if (!jdigits(p)) return jfail(p, "a malformed number");
    }
    if (p->pos - start >= sizeof buf) { p->pos = start; return jfail(p, "a number with too many digits"); }
    memcpy(buf, p->s + start, p->pos - start);
    buf[p->pos - start] = 0;
    v->kind = J_NUM;
    v->num = strtod(buf, &end);
    if (!isfinite(v->num)) { p->pos = start; return jfail(p, "a number beyond the largest double (about 1.8e308)"); }
    return 0;
}

static int jcollection(jparser *p, jval *v, int object)
{
    size_t cap = 0;
    char close = object ? '}' : ']';
    p->pos++;
    v->kind = object ? J_OBJ : J_ARR;
    if (++p->depth > JSON_MAX_DEPTH) return jfail(p, "nested too deeply");
    jspace(p);
    if (p->pos < p->len && p->s[p->pos] == close) { p->pos++; p->depth--; return 0; }
    for (;;) {
        char *key = 0;
        size_t i;
        if (object) {
            jspace(p);
            if (p->pos >= p->len || p->s[p->pos] != '"') return jfail(p, "expected a quoted key");
            if (jstring(p, &key)) return -1;
            for (i = 0; i < v->n; i++) if (strcmp(v->keys[i], key) == 0) { free(key); return jfail(p, "a key appears twice in one object"); }
            jspace(p);
            if (p->pos >= p->len || p->s[p->pos] != ':') { free(key); return jfail(p, "expected ':' after a key"); }
            p->pos++;
        }
        if (v->n == cap) {
            jval *ni;
            char **nk;
            cap = cap ? 2 * cap : 8;
            ni = (jval *)realloc(v->items, cap * sizeof(jval));
            if (!ni) { free(key); return jfail(p, "out of memory"); }
            v->items = ni;
            if (object) {
                nk = (char **)realloc(v->keys, cap * sizeof(char *));
                if (!nk) { free(key); return jfail(p, "out of memory"); }
                v->keys = nk;
            }
        }
        memset(&v->items[v->n], 0, sizeof(jval));
        if (object) v->keys[v->n] = key;
        v->n++;
        if (jvalue(p, &v->items[v->n - 1])) return -1;
        jspace(p);
        if (p->pos < p->len && p->s[p->pos] == ',') { p->pos++; continue; }
        if (p->pos < p->len && p->s[p->pos] == close) { p->pos++; p->depth--; return 0; }
        return jfail(p, object ? "expected ',' or '}'" : "expected ',' or ']'");
    }
}

static int jvalue(jparser *p, jval *v)
{
    jspace(p);
    if (p->pos >= p->len) return jfail(p, "the text ends where a value was expected");
    switch (p->s[p->pos]) {
    case '{': return jcollection(p, v, 1);
    case '[': return jcollection(p, v, 0);
    case '"': v->kind = J_STR; return jstring(p, &v->str);
    case 't': if (p->len - p->pos >= 4 && !strncmp(p->s + p->pos, "true", 4)) { p->pos += 4; v->kind = J_BOOL; v->flag = 1; return 0; } break;
    case 'f': if (p->len - p->pos >= 5 && !strncmp(p->s + p->pos, "false", 5)) { p->pos += 5; v->kind = J_BOOL; return 0; } break;
    case 'n': if (p->len - p->pos >= 4 && !strncmp(p->s + p->pos, "null", 4)) { p->pos += 4; v->kind = J_NULL; return 0; } break;
    default:
        if (p->s[p->pos] == '-' || (p->s[p->pos] >= '0' && p->s[p->pos] <= '9')) return jnumber(p, v);
    }
    return jfail(p, "expected a value (object, list, string, number, true, false or null)");
}

static int jparse(const char *text, size_t len, jval *root, char *err, size_t cap)
{
    jparser p;
    memset(&p, 0, sizeof p);
    memset(root, 0, sizeof *root);
    p.s = text;
    p.len = len;
    if (jvalue(&p, root) == 0) {
        jspace(&p);
        if (p.pos < p.len) jfail(&p, "more text after the value");
    }
    if (p.err[0]) { fmt(err, cap, "%s", p.err); return -1; }
    return 0;
}

static const jval *jget(const jval *o, const char *key)
{
    size_t i;
    if (!o || o->kind != J_OBJ) return 0;
    for (i = 0; i < o->n; i++) if (strcmp(o->keys[i], key) == 0) return &o->items[i];
    return 0;
}

static const char *jkind_name(const jval *v)
{
    switch (v->kind) {
    case J_NULL: return "null";
    case J_BOOL: return "true or false";
    case J_NUM: return "a number";
    case J_STR: return "a string";
    case J_ARR: return "a list";
    default: return "an object";
    }
}

/* ---- reading the network description ---- */

typedef struct {
    char err[600];
    const char *file;
} reader;

static int bad(reader *r, const char *path, const char *form, const char *a, const char *b)
{
    char msg[400];
    fmt(msg, sizeof msg, form, a ? a : "", b ? b : "");
    fmt(r->err, sizeof r->err, "%.150s: %.200s: %.240s", r->file, path, msg);
    return -1;
}

static int unknown_keys(reader *r, const jval *o, const char *path, const char *const *allowed, const char *list)
{
    size_t i;
    int k, ok;
    char at[300];
    for (i = 0; i < o->n; i++) {
        ok = 0;
        for (k = 0; allowed[k]; k++) if (strcmp(o->keys[i], allowed[k]) == 0) ok = 1;
        if (!ok) {
            fmt(at, sizeof at, "%s%s%.200s", path, path[0] ? "." : "", o->keys[i]);
            return bad(r, at, "unknown field (expected one of %s)", list, 0);
        }
    }
    return 0;
}

static int need_number(reader *r, const jval *v, const char *path, double *out)
{
    if (!v) return bad(r, path, "missing%s%s", "", "");
    if (v->kind != J_NUM) return bad(r, path, "must be a number; got %s%s", jkind_name(v), "");
    *out = v->num;
    return 0;
}

static int need_int(reader *r, const jval *v, const char *path, int lo, int hi, int *out)
{
    double d;
    char range[80];
    if (need_number(r, v, path, &d)) return -1;
    fmt(range, sizeof range, "%d..%d", lo, hi);
    if (d != floor(d) || d < lo || d > hi) return bad(r, path, "must be a whole number in %s%s", range, "");
    *out = (int)d;
    return 0;
}

typedef struct {
    saltus_network net;
    saltus_population *pops;
    saltus_projection *projs;
    saltus_trial *trials;
    saltus_real *reals;         /* every number the network holds */
    int *ints;
    size_t n_reals, n_ints, cap_reals, cap_ints;
    char **names;
} built;

/* Pools: offsets while reading (the arrays may move), pointers fixed at the end. */
static long pool_real(built *B, size_t n)
{
    size_t at = B->n_reals;
    if (B->n_reals + n > B->cap_reals) {
        size_t c = B->cap_reals ? B->cap_reals : 256;
        saltus_real *p;
        while (c < B->n_reals + n) c *= 2;
        p = (saltus_real *)realloc(B->reals, c * sizeof(saltus_real));
        if (!p) return -1;
        B->reals = p;
        B->cap_reals = c;
    }
    B->n_reals += n;
    return (long)at;
}

static long pool_int(built *B, size_t n)
{
    size_t at = B->n_ints;
    if (B->n_ints + n > B->cap_ints) {
        size_t c = B->cap_ints ? B->cap_ints : 256;
        int *p;
        while (c < B->n_ints + n) c *= 2;
        p = (int *)realloc(B->ints, c * sizeof(int));
        if (!p) return -1;
        B->ints = p;
        B->cap_ints = c;
    }
    B->n_ints += n;
    return (long)at;
}

static int pop_index(const built *B, int n_pops, const char *name)
{
    int p;
    for (p = 0; p < n_pops; p++) if (strcmp(B->names[p], name) == 0) return p;
    return -1;
}

#define MAX_SIZE 1000000
#define MAX_TRIALS 1000000

/* offsets of pointers into the pools, fixed up once the pools stop moving */
typedef struct { long params, initial, weights, in_pop, in_time, in_index, target; } offsets;

/* Spikes [[t, i], ...] of input population p into the trial's input arrays (offsets in the pools). */
static int read_spikes(reader *r, built *B, const jval *list, const char *path, int p, double duration, int *count)
{
    size_t k;
    char at[320];
    if (list->kind != J_ARR) return bad(r, path, "must be a list of [time_s, index] pairs; got %s%s", jkind_name(list), "");
    for (k = 0; k < list->n; k++) {
        const jval *s = &list->items[k];
        long ip, it, ii;
        int idx;
        fmt(at, sizeof at, "%.280s[%lu]", path, (unsigned long)k);
        if (s->kind != J_ARR || s->n != 2) return bad(r, at, "must be a pair [time_s, index]%s%s", "", "");
        fmt(at, sizeof at, "%.280s[%lu][0]", path, (unsigned long)k);
        if (s->items[0].kind != J_NUM || !(s->items[0].num >= 0)) return bad(r, at, "the time must be a number of seconds >= 0%s%s", "", "");
        if (!(s->items[0].num < duration)) return bad(r, at, "the time is not before duration_s%s%s", "", "");
        fmt(at, sizeof at, "%.280s[%lu][1]", path, (unsigned long)k);
        if (need_int(r, &s->items[1], at, 0, B->pops[p].size - 1, &idx)) return -1;
        ip = pool_int(B, 1); ii = pool_int(B, 1); it = pool_real(B, 1);
        if (ip < 0 || ii < 0 || it < 0) return bad(r, path, "out of memory%s%s", "", "");
        B->ints[ip] = p;
        B->ints[ii] = idx;
        B->reals[it] = (saltus_real)s->items[0].num;
        (*count)++;
    }
    return 0;
}

static const saltus_model *find_model(const char *name)
{
    int k;
    for (k = 0; k < SALTUS_N_MODELS; k++) if (strcmp(saltus_models[k]->name, name) == 0) return saltus_models[k];
    return 0;
}

static int named_values(reader *r, built *B, const jval *o, const char *path, const char *const *names, int count, const char *what,
                        const char *model, long at)
{
    size_t i;
    int k, found;
    char p2[320];
    if (!o) return 0;
    if (o->kind != J_OBJ) return bad(r, path, "must be an object of %s values (SI)%s", what, "");
    for (i = 0; i < o->n; i++) {
        fmt(p2, sizeof p2, "%.200s.%.100s", path, o->keys[i]);
        found = -1;
        for (k = 0; k < count; k++) if (strcmp(names[k], o->keys[i]) == 0) found = k;
        if (found < 0) return bad(r, p2, "%s has no such %s", model, what);
        if (o->items[i].kind != J_NUM) return bad(r, p2, "must be a number (SI); got %s%s", jkind_name(&o->items[i]), "");
        B->reals[at + found] = (saltus_real)o->items[i].num;
    }
    return 0;
}

/* Projection pr's delays (rows x cols, SI) into the pool at *at (-1: none): its "delay_s", one number
 * >= 0 or a matrix shaped like the weights; without one, the model file's delay for the two populations'
 * models and the receiving block (saltus_file_delays), when both are model populations. */
static int read_delays(reader *r, built *B, const jval *pr, const char *path, int from, int to, int receptor, int rows, int cols, long *at)
{
    const jval *d = jget(pr, "delay_s");
    char fp[420], rp[440], ep[460];
    int j, k, matrix;
    double v = -1;
    *at = -1;
    fmt(fp, sizeof fp, "%.400s.delay_s", path);
    if (!d) {
        const saltus_model *fm = B->pops[from].model, *tm = B->pops[to].model;
        if (!fm || !tm) return 0;
        for (k = 0; saltus_file_delays[k].from; k++) {
            const saltus_file_delay *f = &saltus_file_delays[k];
            if (!strcmp(f->from, fm->name) && !strcmp(f->to, tm->name) && tm->incoming_names && !strcmp(f->via, tm->incoming_names[receptor])) { v = f->delay; break; }
        }
        if (v < 0) return 0;
    } else if (d->kind == J_NUM) {
        v = d->num;
        if (!(v >= 0) || !isfinite(v)) return bad(r, fp, "a delay must be a finite number of seconds >= 0%s%s", "", "");
    } else if (d->kind != J_ARR || (int)d->n != rows) {
        char want[80];
        fmt(want, sizeof want, "%d rows of %d numbers", rows, cols);
        return bad(r, fp, "must be one delay (s) or %s, shaped like the weights", want, "");
    }
    matrix = d && d->kind == J_ARR;
    *at = pool_real(B, (size_t)rows * cols);
    if (*at < 0) return bad(r, fp, "out of memory%s%s", "", "");
    for (j = 0; j < rows; j++) {
        const jval *row = matrix ? &d->items[j] : 0;
        fmt(rp, sizeof rp, "%s[%d]", fp, j);
        if (matrix && (row->kind != J_ARR || (int)row->n != cols)) {
            char want[40];
            fmt(want, sizeof want, "%d", cols);
            return bad(r, rp, "must be a list of %s delays (s), like the weights' row%s", want, "");
        }
        for (k = 0; k < cols; k++) {
            double x = matrix ? row->items[k].num : v;
            fmt(ep, sizeof ep, "%s[%d]", rp, k);
            if (matrix && (row->items[k].kind != J_NUM || !(x >= 0) || !isfinite(x))) return bad(r, ep, "a delay must be a finite number of seconds >= 0%s%s", "", "");
            B->reals[*at + (long)j * cols + (long)k] = (saltus_real)x;
        }
    }
    return 0;
}

static int read_network(reader *r, const jval *root, built *B)
{
    static const char *const root_keys[] = {"$schema", "description", "duration_s", "populations", "projections", "loss", "trials", "sample", 0};
    static const char *const input_keys[] = {"size", "spikes", 0};
    static const char *const model_keys[] = {"model", "size", "params", "initial", "scales", 0};
    static const char *const proj_keys[] = {"from", "to", "via", "weights", "delay_s", 0};
    static const char *const trial_keys[] = {"inputs", "label", 0};
    const jval *pops, *projs, *loss, *trials, *v;
    double duration;
    int n_pops, p, j, b, n_trials, lp = -1;
    offsets *off = 0;
    long *proj_w = 0, *proj_d = 0, *trial_in = 0, target_at = -1;
    int *trial_count = 0;
    char path[400], known[300];
    size_t i, k;
    int rc = -1;

    if (root->kind != J_OBJ) return bad(r, "(root)", "must be a JSON object with duration_s, populations, projections and loss%s%s", "", "");
    if (unknown_keys(r, root, "", root_keys, "description, duration_s, populations, projections, loss, trials, sample")) return -1;
    if (need_number(r, jget(root, "duration_s"), "duration_s", &duration)) return -1;
    if (!(duration > 0)) return bad(r, "duration_s", "must be a positive number of seconds%s%s", "", "");
    B->net.duration = (saltus_real)duration;

    pops = jget(root, "populations");
    if (!pops) return bad(r, "populations", "missing: give an object of named populations%s%s", "", "");
    if (pops->kind != J_OBJ || pops->n == 0) return bad(r, "populations", "must be a non-empty object of named populations%s%s", "", "");
    n_pops = (int)pops->n;
    B->pops = (saltus_population *)calloc((size_t)n_pops, sizeof(saltus_population));
    B->names = (char **)calloc((size_t)n_pops, sizeof(char *));
    off = (offsets *)calloc((size_t)n_pops + 1, sizeof(offsets));
    if (!B->pops || !B->names || !off) { bad(r, "populations", "out of memory%s%s", "", ""); goto done; }
    known[0] = 0;
    for (k = 0; k < (size_t)SALTUS_N_MODELS; k++) {
        size_t used = strlen(known);
        fmt(known + used, sizeof known - used, "%s%s", k ? ", " : "", saltus_models[k]->name);
    }
    for (p = 0; p < n_pops; p++) {
        const jval *P = &pops->items[p];
        const saltus_model *M;
        B->names[p] = pops->keys[p];
        B->pops[p].name = pops->keys[p];
        off[p].params = off[p].initial = -1;
        fmt(path, sizeof path, "populations.%.300s", pops->keys[p]);
        if (P->kind != J_OBJ) { bad(r, path, "must be an object; got %s%s", jkind_name(P), ""); goto done; }
        {
            char sp[340];
            fmt(sp, sizeof sp, "%s.size", path);
            if (need_int(r, jget(P, "size"), sp, 1, MAX_SIZE, &B->pops[p].size)) goto done;
        }
        v = jget(P, "model");
        if (v && jget(P, "spikes")) { bad(r, path, "give either \"spikes\" (an input population) or \"model\" (a neuron of the file), not both%s%s", "", ""); goto done; }
        if (!v) { if (unknown_keys(r, P, path, input_keys, "size, spikes")) goto done; continue; }
        if (unknown_keys(r, P, path, model_keys, "model, size, params, initial, scales")) goto done;
        {
            char mp[340];
            fmt(mp, sizeof mp, "%s.model", path);
            if (v->kind != J_STR) { bad(r, mp, "must be the name of a model; got %s%s", jkind_name(v), ""); goto done; }
            M = find_model(v->str);
            if (!M) { bad(r, mp, "no generated model named %.100s (this runner knows %s)", v->str, known); goto done; }
        }
        B->pops[p].model = M;
        off[p].params = pool_real(B, (size_t)M->n_params);
        off[p].initial = pool_real(B, (size_t)M->n_states);
        if (off[p].params < 0 || off[p].initial < 0) { bad(r, path, "out of memory%s%s", "", ""); goto done; }
        for (j = 0; j < M->n_params; j++) B->reals[off[p].params + j] = M->default_params[j];
        for (j = 0; j < M->n_states; j++) B->reals[off[p].initial + j] = M->initial[j];
        {
            char pp[340];
            fmt(pp, sizeof pp, "%s.params", path);
            if (named_values(r, B, jget(P, "params"), pp, M->param_names, M->n_params, "parameter", M->name, off[p].params)) goto done;
            fmt(pp, sizeof pp, "%s.initial", path);
            if (named_values(r, B, jget(P, "initial"), pp, M->state_names, M->n_states, "state", M->name, off[p].initial)) goto done;
        }
    }
    B->net.n_populations = n_pops;

    projs = jget(root, "projections");
    if (!projs) { bad(r, "projections", "missing: give a list of projections (it may be empty)%s%s", "", ""); goto done; }
    if (projs->kind != J_ARR) { bad(r, "projections", "must be a list; got %s%s", jkind_name(projs), ""); goto done; }
    B->net.n_projections = (int)projs->n;
    B->projs = (saltus_projection *)calloc(projs->n + 1, sizeof(saltus_projection));
    proj_w = (long *)calloc(projs->n + 1, sizeof(long));
    proj_d = (long *)calloc(projs->n + 1, sizeof(long));
    if (!B->projs || !proj_w || !proj_d) { bad(r, "projections", "out of memory%s%s", "", ""); goto done; }
    for (i = 0; i < projs->n; i++) {
        const jval *pr = &projs->items[i], *w;
        int from, to, rows, cols;
        char fp[80];
        fmt(path, sizeof path, "projections[%lu]", (unsigned long)i);
        if (pr->kind != J_OBJ) { bad(r, path, "must be an object with from, to and weights%s%s", "", ""); goto done; }
        if (unknown_keys(r, pr, path, proj_keys, "from, to, via, weights, delay_s")) goto done;
        for (j = 0; j < 2; j++) {
            const jval *end = jget(pr, j ? "to" : "from");
            fmt(fp, sizeof fp, "%s.%s", path, j ? "to" : "from");
            if (!end || end->kind != J_STR) { bad(r, fp, "must be the name of a population%s%s", "", ""); goto done; }
            if (pop_index(B, n_pops, end->str) < 0) { bad(r, fp, "no population %.100s%s", end->str, ""); goto done; }
        }
        from = pop_index(B, n_pops, jget(pr, "from")->str);
        to = pop_index(B, n_pops, jget(pr, "to")->str);
        B->projs[i].from = from;
        B->projs[i].to = to;
        if (!B->pops[to].model) { bad(r, fp, "%s is an input population: it cannot receive a projection%s", B->names[to], ""); goto done; }
        if (!B->pops[to].model->has_incoming) { bad(r, fp, "%s has no incoming block%s", B->pops[to].model->name, ""); goto done; }
        {   /* the receiving block: "via" names it by its weight; required with several blocks */
            const saltus_model *tm = B->pops[to].model;
            const jval *via = jget(pr, "via");
            int k, found = -1;
            fmt(fp, sizeof fp, "%s.via", path);
            if (!via) {
                if (tm->has_incoming > 1) { bad(r, path, "%s has several incoming blocks: say which one receives this projection with \"via\"%s", tm->name, ""); goto done; }
                found = 0;
            } else {
                if (via->kind != J_STR) { bad(r, fp, "must be the weight name of one of %s's incoming blocks%s", tm->name, ""); goto done; }
                for (k = 0; k < tm->has_incoming; k++) if (tm->incoming_names && strcmp(tm->incoming_names[k], via->str) == 0) found = k;
                if (found < 0) { bad(r, fp, "%s has no incoming block with the weight %.100s", tm->name, via->str); goto done; }
            }
            B->projs[i].receptor = found;
        }
        for (b = 0; b < (int)i; b++) {
            if (B->projs[b].from == from && B->projs[b].to == to && B->projs[b].receptor == B->projs[i].receptor) {
                bad(r, path, "%s -> %s is projected twice: merge the two projections", B->names[from], B->names[to]);
                goto done;
            }
        }
        if (B->pops[from].model && !B->pops[from].model->has_guard) {
            fmt(fp, sizeof fp, "%s.from", path);
            bad(r, fp, "%s never fires (it has no fire block)%s", B->pops[from].model->name, "");
            goto done;
        }
        rows = B->pops[to].size;
        cols = B->pops[from].size;
        w = jget(pr, "weights");
        fmt(fp, sizeof fp, "%s.weights", path);
        if (!w || w->kind != J_ARR || (int)w->n != rows) {
            char want[120];
            fmt(want, sizeof want, "%d rows (one per neuron of %.40s) of %d numbers", rows, B->names[to], cols);
            bad(r, fp, "must be %s (one per neuron of %s)", want, B->names[from]);
            goto done;
        }
        proj_w[i] = pool_real(B, (size_t)rows * cols);
        if (proj_w[i] < 0) { bad(r, fp, "out of memory%s%s", "", ""); goto done; }
        for (j = 0; j < rows; j++) {
            const jval *row = &w->items[j];
            char rp[120];
            fmt(rp, sizeof rp, "%s[%d]", fp, j);
            if (row->kind != J_ARR || (int)row->n != cols) {
                char want[40];
                fmt(want, sizeof want, "%d", cols);
                bad(r, rp, "must be a list of %s numbers (one per neuron of %s)", want, B->names[from]);
                goto done;
            }
            for (k = 0; k < row->n; k++) {
                char ep[140];
                fmt(ep, sizeof ep, "%s[%lu]", rp, (unsigned long)k);
                if (row->items[k].kind != J_NUM) { bad(r, ep, "must be a number; got %s%s", jkind_name(&row->items[k]), ""); goto done; }
                if (from == to && (int)k == j && row->items[k].num != 0) {
                    bad(r, ep, "a population's projection onto itself has no self-synapses: the diagonal must be 0%s%s", "", "");
                    goto done;
                }
                B->reals[proj_w[i] + (long)j * cols + (long)k] = (saltus_real)row->items[k].num;
            }
        }
        if (read_delays(r, B, pr, path, from, to, B->projs[i].receptor, rows, cols, &proj_d[i])) goto done;
    }

    loss = jget(root, "loss");
    if (!loss) { bad(r, "loss", "missing: give the loss%s%s", "", ""); goto done; }
    if (loss->kind != J_OBJ) { bad(r, "loss", "must be an object; got %s%s", jkind_name(loss), ""); goto done; }
    {
        static const char *const si_keys[] = {"kind", "population", "state", "target", 0};
        static const char *const st_keys[] = {"kind", "population", "targets_s", 0};
        static const char *const ce_keys[] = {"kind", "population", "state", 0};
        static const char *const cf_keys[] = {"kind", "population", "tau_s", 0};
        const jval *kind = jget(loss, "kind"), *pop = jget(loss, "population"), *st;
        const saltus_model *M;
        int kk = 0, s;
        if (!kind || kind->kind != J_STR) { bad(r, "loss.kind", "must be one of state-integral, spike-time, ce-integral, ce-max, ce-first-spike%s%s", "", ""); goto done; }
        if (!strcmp(kind->str, "state-integral")) kk = SALTUS_LOSS_STATE_INTEGRAL;
        else if (!strcmp(kind->str, "spike-time")) kk = SALTUS_LOSS_SPIKE_TIME;
        else if (!strcmp(kind->str, "ce-integral")) kk = SALTUS_LOSS_CE_INTEGRAL;
        else if (!strcmp(kind->str, "ce-max")) kk = SALTUS_LOSS_CE_MAX;
        else if (!strcmp(kind->str, "ce-first-spike")) kk = SALTUS_LOSS_CE_FIRST_SPIKE;
        else { bad(r, "loss.kind", "unknown kind %.60s: use state-integral, spike-time, ce-integral, ce-max or ce-first-spike%s", kind->str, ""); goto done; }
        if (unknown_keys(r, loss, "loss", kk == SALTUS_LOSS_STATE_INTEGRAL ? si_keys : kk == SALTUS_LOSS_SPIKE_TIME ? st_keys
            : kk == SALTUS_LOSS_CE_FIRST_SPIKE ? cf_keys : ce_keys, kk == SALTUS_LOSS_STATE_INTEGRAL ? "kind, population, state, target"
            : kk == SALTUS_LOSS_SPIKE_TIME ? "kind, population, targets_s" : kk == SALTUS_LOSS_CE_FIRST_SPIKE ? "kind, population, tau_s" : "kind, population, state")) goto done;
        if (!pop || pop->kind != J_STR) { bad(r, "loss.population", "must be the name of a model population%s%s", "", ""); goto done; }
        lp = pop_index(B, n_pops, pop->str);
        if (lp < 0 || !B->pops[lp].model) { bad(r, "loss.population", "%.100s is not a model population%s", pop->str, ""); goto done; }
        M = B->pops[lp].model;
        B->net.loss.kind = kk;
        B->net.loss.population = lp;
        B->net.loss.state = -1;
        if (kk == SALTUS_LOSS_STATE_INTEGRAL || kk == SALTUS_LOSS_CE_INTEGRAL || kk == SALTUS_LOSS_CE_MAX) {
            st = jget(loss, "state");
            if (!st || st->kind != J_STR) { bad(r, "loss.state", "must be the name of a state of %s%s", M->name, ""); goto done; }
            for (s = 0; s < M->n_states; s++) if (!strcmp(M->state_names[s], st->str)) B->net.loss.state = s;
            if (B->net.loss.state < 0) { bad(r, "loss.state", "%s has no state %.100s", M->name, st->str); goto done; }
        } else if (!M->has_guard) { bad(r, "loss.population", "%s never fires (it has no fire block)%s", M->name, ""); goto done; }
        if (kk == SALTUS_LOSS_STATE_INTEGRAL || kk == SALTUS_LOSS_SPIKE_TIME) {
            const char *field = kk == SALTUS_LOSS_STATE_INTEGRAL ? "target" : "targets_s";
            const jval *t = jget(loss, field);
            char tp[40];
            int size = B->pops[lp].size;
            fmt(tp, sizeof tp, "loss.%s", field);
            target_at = pool_real(B, (size_t)size);
            if (target_at < 0) { bad(r, tp, "out of memory%s%s", "", ""); goto done; }
            if (t && t->kind == J_NUM && kk == SALTUS_LOSS_STATE_INTEGRAL) { for (s = 0; s < size; s++) B->reals[target_at + s] = (saltus_real)t->num; }
            else if (t && t->kind == J_ARR && (int)t->n == size) {
                for (s = 0; s < size; s++) {
                    if (t->items[s].kind != J_NUM) { bad(r, tp, "every entry must be a number%s%s", "", ""); goto done; }
                    B->reals[target_at + s] = (saltus_real)t->items[s].num;
                }
            } else {
                char want[40];
                fmt(want, sizeof want, "%d", size);
                bad(r, tp, kk == SALTUS_LOSS_STATE_INTEGRAL ? "one number, or a list of %s (one per neuron of %s)" : "a list of %s times (one per neuron of %s)", want, B->names[lp]);
                goto done;
            }
        }
        if (kk == SALTUS_LOSS_CE_FIRST_SPIKE) {
            double tau;
            if (need_number(r, jget(loss, "tau_s"), "loss.tau_s", &tau)) goto done;
            if (!(tau > 0)) { bad(r, "loss.tau_s", "must be a positive time%s%s", "", ""); goto done; }
            B->net.loss.tau = (saltus_real)tau;
        }
    }

    trials = jget(root, "trials");
    n_trials = trials ? (int)trials->n : 1;
    if (trials && (trials->kind != J_ARR || trials->n == 0 || trials->n > MAX_TRIALS)) { bad(r, "trials", "must be a non-empty list of trials%s%s", "", ""); goto done; }
    B->trials = (saltus_trial *)calloc((size_t)n_trials, sizeof(saltus_trial));
    trial_in = (long *)calloc((size_t)n_trials * 3, sizeof(long));
    trial_count = (int *)calloc((size_t)n_trials, sizeof(int));
    if (!B->trials || !trial_in || !trial_count) { bad(r, "trials", "out of memory%s%s", "", ""); goto done; }
    for (b = 0; b < n_trials; b++) {
        const jval *T = trials ? &trials->items[b] : 0, *inputs;
        long start_i = (long)B->n_ints, start_r = (long)B->n_reals;
        /* input spikes: two ints (population, index) and one real (time) per spike, in pool order */
        trial_in[3 * b] = start_i;
        trial_in[3 * b + 1] = start_r;
        if (T) {
            fmt(path, sizeof path, "trials[%d]", b);
            if (T->kind != J_OBJ) { bad(r, path, "must be an object with inputs and label%s%s", "", ""); goto done; }
            if (unknown_keys(r, T, path, trial_keys, "inputs, label")) goto done;
            inputs = jget(T, "inputs");
            if (inputs) {
                char ip[340];
                fmt(ip, sizeof ip, "%s.inputs", path);
                if (inputs->kind != J_OBJ) { bad(r, ip, "must be an object of input populations' spikes%s%s", "", ""); goto done; }
                for (i = 0; i < inputs->n; i++) {
                    int q = pop_index(B, n_pops, inputs->keys[i]);
                    char sp[380];
                    fmt(sp, sizeof sp, "%s.%.200s", ip, inputs->keys[i]);
                    if (q < 0 || B->pops[q].model) { bad(r, sp, "not an input population%s%s", "", ""); goto done; }
                }
                /* in the order of the populations, so the queue order matches the description's */
                for (p = 0; p < n_pops; p++) {
                    const jval *list = jget(inputs, B->names[p]);
                    char sp[380];
                    if (!list) continue;
                    fmt(sp, sizeof sp, "%s.inputs.%.200s", path, B->names[p]);
                    if (read_spikes(r, B, list, sp, p, duration, &trial_count[b])) goto done;
                }
            }
            v = jget(T, "label");
            fmt(path, sizeof path, "trials[%d].label", b);
            if (v && need_int(r, v, path, 0, MAX_SIZE, &B->trials[b].label)) goto done;
            if (B->net.loss.kind >= SALTUS_LOSS_CE_INTEGRAL && (!v || B->trials[b].label >= B->pops[lp].size)) {
                fmt(r->err, sizeof r->err, "%s: %s: a classification loss needs a label in 0..%d", r->file, path, B->pops[lp].size - 1);
                goto done;
            }
        } else {
            for (p = 0; p < n_pops; p++) {
                const jval *list;
                if (B->pops[p].model) continue;
                list = jget(&pops->items[p], "spikes");
                fmt(path, sizeof path, "populations.%.300s.spikes", B->names[p]);
                if (!list) { bad(r, path, "missing: an input population needs its spikes (or give trials)%s%s", "", ""); goto done; }
                if (read_spikes(r, B, list, path, p, duration, &trial_count[b])) goto done;
            }
            if (B->net.loss.kind >= SALTUS_LOSS_CE_INTEGRAL) { bad(r, "trials", "a classification loss needs trials with a label each%s%s", "", ""); goto done; }
        }
    }
    B->net.n_trials = n_trials;

    /* the pools stop moving: fix the pointers */
    for (p = 0; p < n_pops; p++) {
        if (!B->pops[p].model) continue;
        B->pops[p].params = B->reals + off[p].params;
        B->pops[p].initial = B->reals + off[p].initial;
    }
    for (i = 0; i < projs->n; i++) {
        B->projs[i].weights = B->reals + proj_w[i];
        B->projs[i].delays = proj_d[i] >= 0 ? B->reals + proj_d[i] : 0;
    }
    for (b = 0; b < n_trials; b++) {
        /* spikes were stored as (pop, index) int pairs and one time each, in order */
        int n = trial_count[b], *ints = B->ints + trial_in[3 * b];
        int *pop_of = (int *)malloc((size_t)(n > 0 ? n : 1) * sizeof(int)), *idx = (int *)malloc((size_t)(n > 0 ? n : 1) * sizeof(int));
        long at;
        if (!pop_of || !idx) { free(pop_of); free(idx); bad(r, "trials", "out of memory%s%s", "", ""); goto done; }
        for (j = 0; j < n; j++) { pop_of[j] = ints[2 * j]; idx[j] = ints[2 * j + 1]; }
        at = pool_int(B, 2 * (size_t)n + 1);
        if (at < 0) { free(pop_of); free(idx); bad(r, "trials", "out of memory%s%s", "", ""); goto done; }
        for (j = 0; j < n; j++) { B->ints[at + j] = pop_of[j]; B->ints[at + n + j] = idx[j]; }
        free(pop_of);
        free(idx);
        trial_in[3 * b + 2] = at;
    }
    for (b = 0; b < n_trials; b++) {
        int n = trial_count[b];
        B->trials[b].n_inputs = n;
        B->trials[b].input_pop = B->ints + trial_in[3 * b + 2];
        B->trials[b].input_index = B->ints + trial_in[3 * b + 2] + n;
        B->trials[b].input_time = B->reals + trial_in[3 * b + 1];
    }
    if (target_at >= 0) B->net.loss.target = B->reals + target_at;
    B->net.populations = B->pops;
    B->net.projections = B->projs;
    B->net.trials = B->trials;
    rc = 0;
done:
    free(off);
    free(proj_w);
    free(proj_d);
    free(trial_in);
    free(trial_count);
    return rc;
}

static void free_built(built *B)
{
    free(B->pops);
    free(B->projs);
    free(B->trials);
    free(B->reals);
    free(B->ints);
    free(B->names);
}

/* ---- output ---- */

static void put_string(const char *s)
{
    putchar('"');
    for (; *s; s++) {
        unsigned char c = (unsigned char)*s;
        if (c == '"' || c == '\\') { putchar('\\'); putchar((int)c); }
        else if (c < 0x20) printf("\\u%04x", c);
        else putchar((int)c);
    }
    putchar('"');
}

static void put_number(double v)
{
    if (isfinite(v)) printf("%.17g", v);
    else printf("null");
}

static void put_spikes(const saltus_network *net, const saltus_trial_ws *ws)
{
    int p, first;
    size_t e;
    printf("{");
    first = 1;
    for (p = 0; p < net->n_populations; p++) {
        int any = 0;
        if (!net->populations[p].model) continue;
        if (!first) printf(", ");
        first = 0;
        put_string(net->populations[p].name);
        printf(": [");
        for (e = 0; e < ws->n_events; e++) {
            const saltus_event *E = &ws->events[e];
            if (E->kind != 1 || E->pop != p) continue;
            if (any) printf(", ");
            any = 1;
            printf("[");
            put_number((double)E->time);
            printf(", %d]", E->neuron);
        }
        printf("]");
    }
    printf("}");
}

static void put_result(const saltus_network *net, const saltus_result *res, int json)
{
    int j, i, k, p, q, b;
    if (json) {
        printf("{\"loss\": ");
        put_number((double)res->loss);
        printf(", \"spikes\": ");
        put_spikes(net, &res->trials[0]);
        printf(", \"weights\": [");
    } else {
        printf("loss %.17g\n", (double)res->loss);
    }
    for (j = 0; j < net->n_projections; j++) {
        const saltus_projection *pr = &net->projections[j];
        int rows = net->populations[pr->to].size, cols = net->populations[pr->from].size;
        const saltus_real *g = res->gW + res->plan.w_off[j];
        if (json) printf("%s[", j ? ", " : "");
        else printf("dL/dW projection %d (%s -> %s): [", j, net->populations[pr->from].name, net->populations[pr->to].name);
        for (i = 0; i < rows; i++) {
            printf("%s[", i ? ", " : "");
            for (k = 0; k < cols; k++) { if (k) printf(", "); put_number((double)g[(size_t)i * cols + k]); }
            printf("]");
        }
        printf(json ? "]" : "]\n");
    }
    if (json) printf("], \"params\": {");
    k = 0;
    for (p = 0; p < net->n_populations; p++) {
        const saltus_model *M = net->populations[p].model;
        if (!M) continue;
        for (q = 0; q < M->n_grad; q++) {
            double v = (double)res->gP[res->plan.pops[p].g_off + q];
            if (json) {
                char key[512];
                fmt(key, sizeof key, "%s.%s", net->populations[p].name, M->param_names[M->grad_params[q]]);
                printf("%s", k++ ? ", " : "");
                put_string(key);
                printf(": ");
                put_number(v);
            } else printf("dL/d%s.%s: %.17g\n", net->populations[p].name, M->param_names[M->grad_params[q]], v);
        }
    }
    if (json) printf("}");
    for (j = 0; j < net->n_projections; j++) if (net->projections[j].delays) break;
    if (j < net->n_projections) {
        /* dL/d(delay) per projection, laid out like the weights (0 for a projection without delays) */
        if (json) printf(", \"delays\": [");
        for (j = 0; j < net->n_projections; j++) {
            const saltus_projection *pr = &net->projections[j];
            int rows = net->populations[pr->to].size, cols = net->populations[pr->from].size;
            const saltus_real *g = res->gD + res->plan.w_off[j];
            if (json) printf("%s[", j ? ", " : "");
            else printf("dL/d(delay) projection %d (%s -> %s): [", j, net->populations[pr->from].name, net->populations[pr->to].name);
            for (i = 0; i < rows; i++) {
                printf("%s[", i ? ", " : "");
                for (k = 0; k < cols; k++) { if (k) printf(", "); put_number((double)g[(size_t)i * cols + k]); }
                printf("]");
            }
            printf(json ? "]" : "]\n");
        }
        if (json) printf("]");
    }
    if (json) {
        if (net->n_trials > 1) {
            printf(", \"trials\": %d, \"spikes_per_trial\": [", net->n_trials);
            for (b = 0; b < net->n_trials; b++) { if (b) printf(", "); put_spikes(net, &res->trials[b]); }
            printf("]");
        }
        printf("}\n");
    }
}

/* ---- command line ---- */

static const char *USAGE =
    "Usage: saltus_run NET.json --dt TIME [--format json|text] [--max-spikes N] [--rule eventprop|eprop]"
#if defined(__CUDACC__)
    " [--host]"
#endif
    "\n"
    "Runs the network NET.json on the grid of step TIME (e.g. 0.1ms, 100us, 1e-4 s) and prints its loss,\n"
    "spikes and exact gradient (docs/codegen.md, \"Runner\"); --rule eprop runs a layer task instead (--rule eprop --help).\n";

/* A time as the command line writes it: 0.1ms, 0.1 ms, 0.1 [ms], 1e-4 s (s, ms, us, \xC2\xB5s, ns). */
static int parse_time(const char *text, double *out)
{
    const char *s = text;
    char num[64], unit[8];
    size_t n = 0, u = 0;
    double v, scale;
    char *end;
    while (*s == ' ') s++;
    while (*s && (strchr("0123456789.eE+-", *s) != 0) && n < sizeof num - 1) num[n++] = *s++;
    num[n] = 0;
    while (*s == ' ') s++;
    if (*s == '[') { s++; while (*s == ' ') s++; }
    while (*s && u < sizeof unit - 1 && ((*s >= 'a' && *s <= 'z') || (unsigned char)*s == 0xC2 || (unsigned char)*s == 0xB5)) unit[u++] = *s++;
    unit[u] = 0;
    while (*s == ' ') s++;
    if (*s == ']') { s++; while (*s == ' ') s++; }
    if (*s || n == 0) return -1;
    v = strtod(num, &end);
    if (*end) return -1;
    if (!strcmp(unit, "s")) scale = 1;
    else if (!strcmp(unit, "ms")) scale = 1e-3;
    else if (!strcmp(unit, "us") || !strcmp(unit, "\xC2\xB5s")) scale = 1e-6;
    else if (!strcmp(unit, "ns")) scale = 1e-9;
    else return -1;
    *out = v * scale;
    return isfinite(*out) && *out > 0 ? 0 : -1;
}

static char *read_file(const char *path, size_t *len)
{
    FILE *f = fopen(path, "rb");
    char *buf = 0, *nb;
    size_t cap = 0, n = 0, got;
    if (!f) return 0;
    for (;;) {
        if (n + 4096 + 1 > cap) {
            cap = cap ? 2 * cap : 65536;
            nb = (char *)realloc(buf, cap);
            if (!nb) { free(buf); fclose(f); return 0; }
            buf = nb;
        }
        got = fread(buf + n, 1, cap - n - 1, f);
        n += got;
        if (got == 0) break;
    }
    fclose(f);
    buf[n] = 0;
    *len = n;
    return buf;
}

/* --rule eprop: a layer task trained by e-prop (the text after this one; docs/eprop.md). */
static int rule_main(int argc, char **argv);

int main(int argc, char **argv)
{
    const char *path = 0;
    double dt = 0;
    int json = 0, a, host = 0, rc;
    long max_spikes = 100000;
    char *text, err[1000];
    size_t len = 0;
    jval root;
    reader r;
    built B;
    saltus_result res;
    for (a = 1; a + 1 < argc; a++) if (!strcmp(argv[a], "--rule") && strcmp(argv[a + 1], "eventprop")) return rule_main(argc, argv);
    for (a = 1; a < argc; a++) {
        if (!strcmp(argv[a], "--rule")) {
            a++; /* eventprop: this runner */
        } else if (!strcmp(argv[a], "--dt") || !strcmp(argv[a], "--timestep")) {
            if (a + 1 >= argc || parse_time(argv[++a], &dt)) {
                fprintf(stderr, "saltus_run: --dt must be a positive time with a unit, e.g. 0.1ms; got '%s'\n", a < argc ? argv[a] : "");
                return 2;
            }
        } else if (!strcmp(argv[a], "--format")) {
            if (a + 1 >= argc || (strcmp(argv[a + 1], "json") && strcmp(argv[a + 1], "text"))) {
                fprintf(stderr, "saltus_run: --format must be json or text\n");
                return 2;
            }
            json = !strcmp(argv[++a], "json");
        } else if (!strcmp(argv[a], "--max-spikes")) {
            char *end;
            if (a + 1 >= argc || (max_spikes = strtol(argv[a + 1], &end, 10)) < 1 || *end) {
                fprintf(stderr, "saltus_run: --max-spikes must be a whole number >= 1\n");
                return 2;
            }
            a++;
        } else if (!strcmp(argv[a], "--host")) {
            host = 1;
        } else if (!strcmp(argv[a], "-h") || !strcmp(argv[a], "--help")) {
            printf("%s", USAGE);
            return 0;
        } else if (!path && argv[a][0] != '-') {
            path = argv[a];
        } else {
            fprintf(stderr, "saltus_run: unexpected argument '%s'\n%s", argv[a], USAGE);
            return 2;
        }
    }
    if (!path || !(dt > 0)) { fprintf(stderr, "%s", USAGE); return 2; }
    text = read_file(path, &len);
    if (!text) { fprintf(stderr, "saltus_run: %s: cannot read the file\n", path); return 2; }
    if (jparse(text, len, &root, err, sizeof err)) {
        fprintf(stderr, "saltus_run: %s: %s\n", path, err);
        free(text);
        return 2;
    }
    free(text);
    memset(&B, 0, sizeof B);
    memset(&r, 0, sizeof r);
    r.file = path;
    if (read_network(&r, &root, &B)) {
        fprintf(stderr, "saltus_run: %s\n", r.err);
        free_built(&B);
        jfree(&root);
        return 2;
    }
    {
        /* the description's checks that need the models and dt (the runtime's own, field by field) */
        saltus_plan plan;
        if (saltus_plan_make(&B.net, dt, max_spikes, 4e9, &plan, err, sizeof err)) {
            fprintf(stderr, "saltus_run: %s: %s\n", path, err);
            free_built(&B);
            jfree(&root);
            return 2;
        }
        saltus_plan_free(&plan);
    }
#if defined(__CUDACC__)
    if (!host) rc = saltus_cuda_run(&B.net, dt, max_spikes, &res, err, sizeof err);
    else
#endif
        rc = saltus_run(&B.net, dt, max_spikes, &res, err, sizeof err);
    (void)host;
    if (rc) {
        fprintf(stderr, "saltus_run: %s\n", err);
        free_built(&B);
        jfree(&root);
        return 1;
    }
    put_result(&B.net, &res, json);
    saltus_result_free(&res);
    free_built(&B);
    jfree(&root);
    return 0;
}
