
/* ---- --rule eprop (docs/eprop.md, "Generated code"): a layer task trained by e-prop ----
 * TASK.json = {"model", "inputs": [trial][step][input], "win": [neuron][input],
 * "wout": [output][neuron], "kappa", "targets": [trial][step][output], "params"?: {NAME: value}};
 * a model with several incoming blocks takes "blocks": {WEIGHT: {"inputs", "win"}} in place of
 * "inputs" and "win" (its "weights" then maps each fed block's name to its gradient); prints {"loss", "spikes", "weights", "readout", "params", "kept_bytes"}, or with --epochs the
 * loss of every epoch {"losses": [...]} (gradient descent on win and wout). */

static const char *EPROP_USAGE =
    "Usage: saltus_run TASK.json --dt TIME --rule eprop [--feedback exact|symmetric|random] [--seed N]\n"
    "                  [--epochs N --lr RATE] [--format json|text]\n"
    "Runs e-prop on a layer task (docs/eprop.md): TASK.json = {\"model\", \"inputs\": [trial][step][input],\n"
    "\"win\": [neuron][input], \"wout\": [output][neuron], \"kappa\", \"targets\": [trial][step][output], \"params\"?};\n"
    "several incoming blocks: \"blocks\": {WEIGHT: {\"inputs\", \"win\"}} in place of \"inputs\" and \"win\".\n";

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

/* A task's "blocks" (several incoming blocks): each fed block's inputs and win, concatenated along
 * the inputs in the model's block order, with each input's block in *in_block. 0, or -1 with err. */
static int eprop_blocks(const saltus_eprop_model *em, const jval *blocks, saltus_eprop_task *tk, saltus_real **inputs, saltus_real **win,
                        int **in_block, char *err, size_t cap)
{
    int b, d, dims[3], n_in = 0, B = 0, T = 0, N = 0;
    size_t j, t;
    saltus_real *bi[64], *bw[64];
    int bn[64];
    char path[300];
    if (em->n_blocks < 2 || em->n_blocks > 64) { fmt(err, cap, "blocks: %.100s has no several incoming blocks; give \"inputs\" and \"win\"", em->model->name); return -1; }
    if (blocks->kind != J_OBJ || blocks->n == 0) { fmt(err, cap, "blocks: must map weight names of %.100s to {\"inputs\", \"win\"}", em->model->name); return -1; }
    for (j = 0; j < blocks->n; j++) {
        int found = -1;
        for (b = 0; b < em->n_blocks; b++) if (!strcmp(em->block_name[b], blocks->keys[j])) found = b;
        if (found < 0 || blocks->items[j].kind != J_OBJ) { fmt(err, cap, "blocks.%.200s: %.100s has no incoming block with this weight, or it is not an object", blocks->keys[j], em->model->name); return -1; }
    }
    for (b = 0; b < em->n_blocks; b++) {
        const jval *v = jget(blocks, em->block_name[b]);
        bi[b] = bw[b] = 0;
        bn[b] = 0;
        if (!v) continue;
        dims[0] = B; dims[1] = T; dims[2] = 0;
        snprintf(path, sizeof path, "blocks.%.200s.inputs", em->block_name[b]);
        if (eprop_nd(jget(v, "inputs"), 3, dims, &bi[b], path, err, cap)) goto fail;
        B = dims[0]; T = dims[1]; bn[b] = dims[2];
        dims[0] = N; dims[1] = bn[b];
        snprintf(path, sizeof path, "blocks.%.200s.win", em->block_name[b]);
        if (eprop_nd(jget(v, "win"), 2, dims, &bw[b], path, err, cap)) goto fail;
        N = dims[0];
        n_in += bn[b];
    }
    *inputs = (saltus_real *)malloc((size_t)B * T * n_in * sizeof(saltus_real));
    *win = (saltus_real *)malloc((size_t)N * n_in * sizeof(saltus_real));
    *in_block = (int *)malloc((size_t)n_in * sizeof(int));
    if (!*inputs || !*win || !*in_block) { fmt(err, cap, "out of memory"); goto fail; }
    for (b = 0, d = 0; b < em->n_blocks; b++) {
        int i;
        for (i = 0; i < bn[b]; i++) (*in_block)[d + i] = b;
        for (t = 0; t < (size_t)B * T; t++) for (i = 0; i < bn[b]; i++) (*inputs)[t * n_in + d + i] = bi[b][t * bn[b] + i];
        for (t = 0; t < (size_t)N; t++) for (i = 0; i < bn[b]; i++) (*win)[t * n_in + d + i] = bw[b][t * bn[b] + i];
        d += bn[b];
    }
    for (b = 0; b < em->n_blocks; b++) { free(bi[b]); free(bw[b]); }
    tk->B = B; tk->T = T; tk->n_in = n_in; tk->N = N;
    return 0;
fail:
    for (d = 0; d <= b && d < em->n_blocks; d++) { free(bi[d]); free(bw[d]); }
    return -1;
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
    int *in_block = 0;
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
    if (jget(&root, "blocks")) {
        if (eprop_blocks(em, jget(&root, "blocks"), &tk, &inputs, &win, &in_block, err, sizeof err)) goto bad;
    } else {
        if (eprop_nd(jget(&root, "inputs"), 3, dims, &inputs, "inputs", err, sizeof err)) goto bad;
        tk.B = dims[0]; tk.T = dims[1]; tk.n_in = dims[2];
        dims[0] = 0; dims[1] = tk.n_in;
        if (eprop_nd(jget(&root, "win"), 2, dims, &win, "win", err, sizeof err)) goto bad;
        tk.N = dims[0];
    }
    tk.in_block = in_block;
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
        if (in_block) { /* by block: the columns of each fed block */
            int b0 = 0, i0, i1, r, c;
            printf("{");
            for (i0 = 0; i0 < tk.n_in; i0 = i1, b0++) {
                for (i1 = i0; i1 < tk.n_in && in_block[i1] == in_block[i0]; i1++) continue;
                printf("%s", b0 ? ", " : "");
                put_string(em->block_name[in_block[i0]]);
                printf(": [");
                for (r = 0; r < tk.N; r++) {
                    printf("%s[", r ? ", " : "");
                    for (c = i0; c < i1; c++) { if (c > i0) printf(", "); put_number((double)res.grad_w[(size_t)r * tk.n_in + c]); }
                    printf("]");
                }
                printf("]");
            }
            printf("}");
        } else eprop_put_matrix(res.grad_w, tk.N, tk.n_in);
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
    free(inputs); free(win); free(wout); free(targets); free(fb); free(params); free(in_block);
    jfree(&root);
    return rc;
}
