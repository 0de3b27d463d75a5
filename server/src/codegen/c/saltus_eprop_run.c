
/* ---- --rule eprop (docs/eprop.md, "Generated code"): a layer task trained by e-prop ----
 * TASK.json = {"model", "inputs": [trial][step][input], "win": [neuron][input],
 * "wout": [output][neuron], "kappa", "targets": [trial][step][output], "params"?: {NAME: value}};
 * prints {"loss", "spikes", "weights", "readout", "params", "kept_bytes"}, or with --epochs the
 * loss of every epoch {"losses": [...]} (gradient descent on win and wout). */

static const char *EPROP_USAGE =
    "Usage: saltus_run TASK.json --dt TIME --rule eprop [--feedback exact|symmetric|random] [--seed N]\n"
    "                  [--epochs N --lr RATE] [--format json|text]\n"
    "Runs e-prop on a layer task (docs/eprop.md): TASK.json = {\"model\", \"inputs\": [trial][step][input],\n"
    "\"win\": [neuron][input], \"wout\": [output][neuron], \"kappa\", \"targets\": [trial][step][output], \"params\"?}.\n";

/* A rectangular nested list of numbers with nd levels: dims filled (or checked where > 0). */
static int eprop_nd(const jval *v, int nd, int *dims, saltus_real **out, const char *path, char *err, size_t cap)
{
    const jval *c = v;
    size_t total = 1, at = 0, k;
    int d;
    size_t idx[3] = {0, 0, 0};
    if (!v) { fmt(err, cap, "%s: missing", path); return -1; }
    for (d = 0; d < nd; d++) {
        if (c->kind != J_ARR || c->n == 0) { fmt(err, cap, "%s: must be a non-empty list nested %d deep", path, nd); return -1; }
        if (dims[d] > 0 && (size_t)dims[d] != c->n) { fmt(err, cap, "%s: level %d has %lu entries; expected %d", path, d + 1, (unsigned long)c->n, dims[d]); return -1; }
        if (c->n > 100000000UL) { fmt(err, cap, "%s: too long", path); return -1; }
        dims[d] = (int)c->n;
        total *= c->n;
        c = &c->items[0];
    }
    *out = (saltus_real *)malloc(total * sizeof(saltus_real));
    if (!*out) { fmt(err, cap, "%s: out of memory", path); return -1; }
    for (at = 0; at < total; at++) {
        size_t rest = at;
        for (d = nd - 1; d >= 0; d--) { idx[d] = rest % (size_t)dims[d]; rest /= (size_t)dims[d]; }
        c = v;
        for (d = 0; d < nd; d++) {
            if (c->kind != J_ARR || c->n != (size_t)dims[d]) {
                fmt(err, cap, "%s: the lists are not rectangular (level %d)", path, d + 1);
                free(*out);
                *out = 0;
                return -1;
            }
            c = &c->items[idx[d]];
        }
        if (c->kind != J_NUM) { fmt(err, cap, "%s: must hold numbers; got %s", path, jkind_name(c)); free(*out); *out = 0; return -1; }
        (*out)[at] = (saltus_real)c->num;
    }
    (void)k;
    return 0;
}

static void eprop_put_matrix(const saltus_real *m, int rows, int cols)
{
    int i, k;
    printf("[");
    for (i = 0; i < rows; i++) {
        printf("%s[", i ? ", " : "");
        for (k = 0; k < cols; k++) { if (k) printf(", "); put_number((double)m[(size_t)i * cols + k]); }
        printf("]");
    }
    printf("]");
}

static int rule_main(int argc, char **argv)
{
    const char *path = 0, *feedback = "exact";
    double dt = 0, lr = 0;
    int a, json = 0, epochs = -1, m, q, e, rc = 2, dims[3];
    unsigned long seed = 0;
    char *text = 0, err[1000], *end;
    size_t len = 0, j;
    jval root;
    const jval *v;
    const saltus_eprop_model *em = 0;
    saltus_eprop_task tk;
    saltus_eprop_result res;
    saltus_real *inputs = 0, *win = 0, *wout = 0, *targets = 0, *fb = 0, *params = 0;
    memset(&tk, 0, sizeof tk);
    memset(&res, 0, sizeof res);
    for (a = 1; a < argc; a++) {
        if (!strcmp(argv[a], "--rule")) {
            if (a + 1 >= argc || strcmp(argv[++a], "eprop")) { fprintf(stderr, "saltus_run: --rule must be eventprop or eprop\n"); return 2; }
        } else if (!strcmp(argv[a], "--dt") || !strcmp(argv[a], "--timestep")) {
            if (a + 1 >= argc || parse_time(argv[++a], &dt)) { fprintf(stderr, "saltus_run: --dt must be a positive time with a unit, e.g. 1ms\n"); return 2; }
        } else if (!strcmp(argv[a], "--format")) {
            if (a + 1 >= argc || (strcmp(argv[a + 1], "json") && strcmp(argv[a + 1], "text"))) { fprintf(stderr, "saltus_run: --format must be json or text\n"); return 2; }
            json = !strcmp(argv[++a], "json");
        } else if (!strcmp(argv[a], "--feedback")) {
            if (a + 1 >= argc || (strcmp(argv[a + 1], "exact") && strcmp(argv[a + 1], "symmetric") && strcmp(argv[a + 1], "random"))) {
                fprintf(stderr, "saltus_run: --feedback must be exact, symmetric or random\n");
                return 2;
            }
            feedback = argv[++a];
        } else if (!strcmp(argv[a], "--epochs")) {
            if (a + 1 >= argc || (epochs = (int)strtol(argv[a + 1], &end, 10)) < 1 || *end) { fprintf(stderr, "saltus_run: --epochs must be a whole number >= 1\n"); return 2; }
            a++;
        } else if (!strcmp(argv[a], "--lr")) {
            if (a + 1 >= argc || !((lr = strtod(argv[a + 1], &end)) >= 0) || *end) { fprintf(stderr, "saltus_run: --lr must be a number >= 0\n"); return 2; }
            a++;
        } else if (!strcmp(argv[a], "--seed")) {
            if (a + 1 >= argc) { fprintf(stderr, "saltus_run: --seed needs a whole number\n"); return 2; }
            seed = strtoul(argv[++a], &end, 10);
        } else if (!strcmp(argv[a], "-h") || !strcmp(argv[a], "--help")) {
            printf("%s", EPROP_USAGE);
            return 0;
        } else if (!path && argv[a][0] != '-') {
            path = argv[a];
        } else {
            fprintf(stderr, "saltus_run: unexpected argument '%s'\n%s", argv[a], EPROP_USAGE);
            return 2;
        }
    }
    if (!path || !(dt > 0)) { fprintf(stderr, "%s", EPROP_USAGE); return 2; }
    text = read_file(path, &len);
    if (!text) { fprintf(stderr, "saltus_run: %s: cannot read the file\n", path); return 2; }
    if (jparse(text, len, &root, err, sizeof err)) { fprintf(stderr, "saltus_run: %s: %s\n", path, err); free(text); return 2; }
    free(text);
    v = jget(&root, "model");
    for (m = 0; v && v->kind == J_STR && m < SALTUS_N_MODELS; m++) if (!strcmp(saltus_eprop_models[m]->model->name, v->str)) em = saltus_eprop_models[m];
    if (!em) { fprintf(stderr, "saltus_run: %s: model: must name one of the models of this runner\n", path); goto done; }
    if (em->n_q == 0) { fprintf(stderr, "saltus_run: %s has no e-prop traces: %s\n", em->model->name, em->none ? em->none : "no surrogate"); goto done; }
    dims[0] = dims[1] = dims[2] = 0;
    if (eprop_nd(jget(&root, "inputs"), 3, dims, &inputs, "inputs", err, sizeof err)) goto bad;
    tk.B = dims[0]; tk.T = dims[1]; tk.n_in = dims[2];
    dims[0] = 0; dims[1] = tk.n_in;
    if (eprop_nd(jget(&root, "win"), 2, dims, &win, "win", err, sizeof err)) goto bad;
    tk.N = dims[0];
    dims[0] = 0; dims[1] = tk.N;
    if (eprop_nd(jget(&root, "wout"), 2, dims, &wout, "wout", err, sizeof err)) goto bad;
    tk.K = dims[0];
    dims[0] = tk.B; dims[1] = tk.T; dims[2] = tk.K;
    if (eprop_nd(jget(&root, "targets"), 3, dims, &targets, "targets", err, sizeof err)) goto bad;
    v = jget(&root, "kappa");
    if (!v || v->kind != J_NUM || !(v->num >= 0 && v->num < 1)) { fmt(err, sizeof err, "kappa: must be a number in [0, 1)"); goto bad; }
    tk.kappa = (saltus_real)v->num;
    params = (saltus_real *)malloc(((size_t)em->model->n_params + 1) * sizeof(saltus_real));
    fb = (saltus_real *)malloc(((size_t)tk.K * tk.N) * sizeof(saltus_real));
    if (!params || !fb) { fmt(err, sizeof err, "out of memory"); goto bad; }
    for (m = 0; m < em->model->n_params; m++) params[m] = em->model->default_params[m];
    v = jget(&root, "params");
    if (v && v->kind == J_OBJ) {
        for (j = 0; j < v->n; j++) {
            int found = -1;
            for (m = 0; m < em->model->n_params; m++) if (!strcmp(em->model->param_names[m], v->keys[j])) found = m;
            if (found < 0 || v->items[j].kind != J_NUM) { fmt(err, sizeof err, "params.%.200s: not a parameter of %.100s, or not a number", v->keys[j], em->model->name); goto bad; }
            params[found] = (saltus_real)v->items[j].num;
        }
    } else if (v && v->kind != J_NULL) { fmt(err, sizeof err, "params: must be an object"); goto bad; }
    tk.inputs = inputs; tk.win = win; tk.wout = wout; tk.targets = targets; tk.params = params;
    tk.dt = (saltus_real)dt;
    tk.feedback = fb;
    if (!strcmp(feedback, "random")) saltus_eprop_random_feedback(tk.K, tk.N, seed, fb);
    rc = 1;
    if (epochs > 0) {
        if (json) printf("{\"losses\": [");
        for (e = 0; e < epochs; e++) {
            if (strcmp(feedback, "random")) memcpy(fb, wout, (size_t)tk.K * tk.N * sizeof(saltus_real));
            if (saltus_eprop_layer(em, &tk, &res, err, sizeof err)) { if (json) printf("]}\n"); fprintf(stderr, "saltus_run: %s\n", err); goto done; }
            if (json) { printf("%s", e ? ", " : ""); put_number((double)res.loss); } else printf("epoch %d loss %.17g\n", e + 1, (double)res.loss);
            for (j = 0; j < (size_t)tk.N * tk.n_in; j++) win[j] -= (saltus_real)lr * res.grad_w[j];
            for (j = 0; j < (size_t)tk.K * tk.N; j++) wout[j] -= (saltus_real)lr * res.grad_out[j];
            saltus_eprop_result_free(&res);
        }
        if (json) printf("]}\n");
        rc = 0;
        goto done;
    }
    if (strcmp(feedback, "random")) memcpy(fb, wout, (size_t)tk.K * tk.N * sizeof(saltus_real));
    if (saltus_eprop_layer(em, &tk, &res, err, sizeof err)) { fprintf(stderr, "saltus_run: %s\n", err); goto done; }
    if (json) {
        printf("{\"loss\": ");
        put_number((double)res.loss);
        printf(", \"spikes\": %ld, \"weights\": ", res.spikes);
        eprop_put_matrix(res.grad_w, tk.N, tk.n_in);
        printf(", \"readout\": ");
        eprop_put_matrix(res.grad_out, tk.K, tk.N);
        printf(", \"params\": {");
        for (q = 0, m = 0; q < em->n_q; q++) {
            if (em->q_kind[q] == 0) continue;
            printf("%s", m++ ? ", " : "");
            put_string(em->q_name[q]);
            printf(": ");
            put_number((double)res.grad_q[q]);
        }
        printf("}, \"kept_bytes\": %lu}\n", (unsigned long)res.kept_bytes);
    } else {
        printf("loss %.17g\nspikes %ld\nkept_bytes %lu\n", (double)res.loss, res.spikes, (unsigned long)res.kept_bytes);
        for (q = 0; q < em->n_q; q++) if (em->q_kind[q] == 1) printf("dE/d%s: %.17g\n", em->q_name[q], (double)res.grad_q[q]);
    }
    saltus_eprop_result_free(&res);
    rc = 0;
    goto done;
bad:
    fprintf(stderr, "saltus_run: %s: %s\n", path, err);
    rc = 2;
done:
    free(inputs); free(win); free(wout); free(targets); free(fb); free(params);
    jfree(&root);
    return rc;
}
