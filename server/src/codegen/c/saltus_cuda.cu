
/* ---- CUDA: every trial on the GPU, one thread per trial (docs/codegen.md, "CUDA") ----
 * The network, the plan and one workspace per trial are copied to the device; a workspace has
 * a fixed capacity there (events, the states logged with them, pending arrivals): a trial that
 * fills it stops with SALTUS_E_CAPACITY and the launcher runs every trial again with twice the
 * room. Each trial accumulates its own gradient; the host sums them in trial order. */

#define SALTUS_THREADS 64

__global__ void saltus_forward_kernel(const saltus_network *net, const saltus_plan *plan, saltus_trial_ws *ws, int n_trials)
{
    int b = (int)(blockIdx.x * blockDim.x + threadIdx.x);
    if (b >= n_trials) return;
    saltus_trial_forward(net, plan, b, &ws[b]);
}

__global__ void saltus_backward_kernel(const saltus_network *net, const saltus_plan *plan, saltus_trial_ws *ws, int n_trials,
                                       saltus_real *gW, saltus_real *gP, saltus_real *gD)
{
    int b = (int)(blockIdx.x * blockDim.x + threadIdx.x);
    if (b >= n_trials || ws[b].status != SALTUS_OK) return;
    saltus_trial_backward(net, plan, b, &ws[b], gW + (size_t)b * plan->w_total, gP + (size_t)b * plan->g_total, gD + (size_t)b * plan->w_total);
}

/* Device memory of one run: every allocation is listed here and freed together. */
typedef struct {
    void *blocks[64];
    int n;
} saltus_dev_mem;

static void *saltus_dev_copy(saltus_dev_mem *mem, const void *host, size_t bytes, cudaError_t *err)
{
    void *d = 0;
    if (*err != cudaSuccess) return 0;
    if (mem->n >= 64) { *err = cudaErrorMemoryAllocation; return 0; }
    *err = cudaMalloc(&d, bytes ? bytes : 1);
    if (*err != cudaSuccess) return 0;
    mem->blocks[mem->n++] = d;
    if (host && bytes) *err = cudaMemcpy(d, host, bytes, cudaMemcpyHostToDevice);
    else if (bytes) *err = cudaMemset(d, 0, bytes);
    return d;
}

static void saltus_dev_free(saltus_dev_mem *mem)
{
    int i;
    for (i = 0; i < mem->n; i++) cudaFree(mem->blocks[i]);
    mem->n = 0;
}

/* The network with every array in device memory (the struct itself too). */
static saltus_network *saltus_dev_network(saltus_dev_mem *mem, const saltus_network *net, cudaError_t *err)
{
    saltus_network d = *net;
    saltus_population *pops = (saltus_population *)malloc((size_t)net->n_populations * sizeof(saltus_population));
    saltus_projection *projs = (saltus_projection *)malloc(((size_t)net->n_projections + 1) * sizeof(saltus_projection));
    saltus_trial *trials = (saltus_trial *)malloc((size_t)net->n_trials * sizeof(saltus_trial));
    saltus_real *params = 0, *initial = 0, *weights = 0, *delays = 0, *times = 0, *targets = 0;
    int *ipop = 0, *iidx = 0;
    size_t np = 0, ns = 0, nw = 0, ni = 0, a, b2, c;
    int p, j, b, k;
    saltus_network *out = 0;
    if (!pops || !projs || !trials) { *err = cudaErrorMemoryAllocation; goto done; }
    /* every population's parameters and initial states, every weight, every input spike: one array each */
    for (p = 0; p < net->n_populations; p++) if (net->populations[p].model) {
        np += (size_t)net->populations[p].model->n_params;
        ns += (size_t)net->populations[p].model->n_states;
    }
    for (j = 0; j < net->n_projections; j++) nw += (size_t)net->populations[net->projections[j].to].size * net->populations[net->projections[j].from].size;
    for (b = 0; b < net->n_trials; b++) ni += (size_t)net->trials[b].n_inputs;
    params = (saltus_real *)malloc((np + 1) * sizeof(saltus_real));
    initial = (saltus_real *)malloc((ns + 1) * sizeof(saltus_real));
    weights = (saltus_real *)malloc((nw + 1) * sizeof(saltus_real));
    delays = (saltus_real *)malloc((nw + 1) * sizeof(saltus_real));
    times = (saltus_real *)malloc((ni + 1) * sizeof(saltus_real));
    ipop = (int *)malloc((ni + 1) * sizeof(int));
    iidx = (int *)malloc((ni + 1) * sizeof(int));
    if (!params || !initial || !weights || !delays || !times || !ipop || !iidx) { *err = cudaErrorMemoryAllocation; goto done; }
    a = b2 = 0;
    for (p = 0; p < net->n_populations; p++) {
        const saltus_model *M = net->populations[p].model;
        if (!M) continue;
        memcpy(params + a, net->populations[p].params, (size_t)M->n_params * sizeof(saltus_real));
        memcpy(initial + b2, net->populations[p].initial, (size_t)M->n_states * sizeof(saltus_real));
        a += (size_t)M->n_params;
        b2 += (size_t)M->n_states;
    }
    a = 0;
    for (j = 0; j < net->n_projections; j++) {
        size_t n = (size_t)net->populations[net->projections[j].to].size * net->populations[net->projections[j].from].size;
        memcpy(weights + a, net->projections[j].weights, n * sizeof(saltus_real));
        if (net->projections[j].delays) memcpy(delays + a, net->projections[j].delays, n * sizeof(saltus_real));
        a += n;
    }
    a = 0;
    for (b = 0; b < net->n_trials; b++) for (k = 0; k < net->trials[b].n_inputs; k++, a++) {
        times[a] = net->trials[b].input_time[k];
        ipop[a] = net->trials[b].input_pop[k];
        iidx[a] = net->trials[b].input_index[k];
    }
    {
        saltus_real *dparams = (saltus_real *)saltus_dev_copy(mem, params, np * sizeof(saltus_real), err);
        saltus_real *dinitial = (saltus_real *)saltus_dev_copy(mem, initial, ns * sizeof(saltus_real), err);
        saltus_real *dweights = (saltus_real *)saltus_dev_copy(mem, weights, nw * sizeof(saltus_real), err);
        saltus_real *ddelays = (saltus_real *)saltus_dev_copy(mem, delays, nw * sizeof(saltus_real), err);
        saltus_real *dtimes = (saltus_real *)saltus_dev_copy(mem, times, ni * sizeof(saltus_real), err);
        int *dipop = (int *)saltus_dev_copy(mem, ipop, ni * sizeof(int), err);
        int *diidx = (int *)saltus_dev_copy(mem, iidx, ni * sizeof(int), err);
        saltus_model *models = (saltus_model *)malloc((size_t)net->n_populations * sizeof(saltus_model));
        saltus_model *dmodels;
        if (!models) { *err = cudaErrorMemoryAllocation; goto done; }
        /* the device reads a model's facts and id only: its kernels are called through saltus_dispatch_* */
        for (p = 0; p < net->n_populations; p++) if (net->populations[p].model) models[p] = *net->populations[p].model;
        dmodels = (saltus_model *)saltus_dev_copy(mem, models, (size_t)net->n_populations * sizeof(saltus_model), err);
        free(models);
        if (*err != cudaSuccess) goto done;
        a = b2 = 0;
        for (p = 0; p < net->n_populations; p++) {
            const saltus_model *M = net->populations[p].model;
            pops[p] = net->populations[p];
            pops[p].name = 0;
            if (!M) continue;
            pops[p].model = dmodels + p;
            pops[p].params = dparams + a;
            pops[p].initial = dinitial + b2;
            a += (size_t)M->n_params;
            b2 += (size_t)M->n_states;
        }
        a = 0;
        for (j = 0; j < net->n_projections; j++) {
            projs[j] = net->projections[j];
            projs[j].weights = dweights + a;
            if (net->projections[j].delays) projs[j].delays = ddelays + a;
            a += (size_t)net->populations[net->projections[j].to].size * net->populations[net->projections[j].from].size;
        }
        a = 0;
        for (b = 0; b < net->n_trials; b++) {
            trials[b] = net->trials[b];
            trials[b].input_time = dtimes + a;
            trials[b].input_pop = dipop + a;
            trials[b].input_index = diidx + a;
            a += (size_t)net->trials[b].n_inputs;
        }
        c = net->loss.target ? (size_t)net->populations[net->loss.population].size : 0;
        if (c) targets = (saltus_real *)saltus_dev_copy(mem, net->loss.target, c * sizeof(saltus_real), err);
        d.populations = (saltus_population *)saltus_dev_copy(mem, pops, (size_t)net->n_populations * sizeof(saltus_population), err);
        d.projections = (saltus_projection *)saltus_dev_copy(mem, projs, (size_t)net->n_projections * sizeof(saltus_projection), err);
        d.trials = (saltus_trial *)saltus_dev_copy(mem, trials, (size_t)net->n_trials * sizeof(saltus_trial), err);
        d.loss.target = targets;
        out = (saltus_network *)saltus_dev_copy(mem, &d, sizeof d, err);
    }
done:
    free(pops); free(projs); free(trials); free(params); free(initial); free(weights); free(delays); free(times); free(ipop); free(iidx);
    return *err == cudaSuccess ? out : 0;
}

int saltus_cuda_run(const saltus_network *net, double dt, long max_spikes, saltus_result *out, char *err, size_t cap)
{
    saltus_dev_mem mem, wsmem;
    cudaError_t ce = cudaSuccess;
    saltus_network *dnet;
    saltus_plan dplan_h, *dplan;
    saltus_trial_ws *hws = 0, *dws = 0;
    saltus_real *dgW = 0, *dgP = 0, *dgD = 0, *hgW = 0, *hgP = 0, *hgD = 0;
    size_t R, I, cap_events, cap_x, cap_s, cap_q, max_state = 1, max_n = 1, max_in = 0;
    int B = net->n_trials, b, p, attempt, capacity, blocks = (net->n_trials + SALTUS_THREADS - 1) / SALTUS_THREADS;
    size_t i;
    char msg[512];
    memset(&mem, 0, sizeof mem);
    memset(&wsmem, 0, sizeof wsmem);
    memset(out, 0, sizeof *out);
    if (saltus_plan_make(net, dt, max_spikes, 0, &out->plan, err, cap)) return -1;
    out->n_trials = B;
    out->trials = (saltus_trial_ws *)calloc((size_t)B, sizeof(saltus_trial_ws));
    out->gW = (saltus_real *)calloc(out->plan.w_total + 1, sizeof(saltus_real));
    out->gP = (saltus_real *)calloc((size_t)out->plan.g_total + 1, sizeof(saltus_real));
    out->gD = (saltus_real *)calloc(out->plan.w_total + 1, sizeof(saltus_real));
    hws = (saltus_trial_ws *)calloc((size_t)B, sizeof(saltus_trial_ws));
    if (!out->trials || !out->gW || !out->gP || !out->gD || !hws) { snprintf(err, cap, "out of memory"); goto fail; }
    cudaDeviceSetLimit(cudaLimitStackSize, 32 * 1024);
    dnet = saltus_dev_network(&mem, net, &ce);
    dplan_h = out->plan;
    dplan_h.pops = (saltus_pop_plan *)saltus_dev_copy(&mem, out->plan.pops, (size_t)net->n_populations * sizeof(saltus_pop_plan), &ce);
    dplan_h.w_off = (size_t *)saltus_dev_copy(&mem, out->plan.w_off, ((size_t)net->n_projections + 1) * sizeof(size_t), &ce);
    dplan = (saltus_plan *)saltus_dev_copy(&mem, &dplan_h, sizeof dplan_h, &ce);
    if (ce != cudaSuccess) goto cuda_fail;
    for (p = 0; p < net->n_populations; p++) {
        size_t st = (size_t)net->populations[p].size * (size_t)out->plan.pops[p].S;
        if (st > max_state) max_state = st;
        if ((size_t)net->populations[p].size > max_n) max_n = (size_t)net->populations[p].size;
    }
    for (b = 0; b < B; b++) if ((size_t)net->trials[b].n_inputs > max_in) max_in = (size_t)net->trials[b].n_inputs;
    R = saltus_ws_reals(&out->plan);
    I = saltus_ws_ints(&out->plan);
    cap_events = 1024 + 4 * max_in * (size_t)(net->n_projections + 1);
    for (attempt = 0; attempt < 12; attempt++) {
        saltus_real *reals, *Tbuf, *Tnbuf, *xbuf;
        int *ints, *sbuf;
        saltus_event *events;
        saltus_pending *queue;
        cap_x = cap_events * max_state;
        cap_s = cap_events * max_n;
        cap_q = max_in * (size_t)(net->n_projections + 1) + cap_events;
        saltus_dev_free(&wsmem);
        reals = (saltus_real *)saltus_dev_copy(&wsmem, 0, (size_t)B * R * sizeof(saltus_real), &ce);
        ints = (int *)saltus_dev_copy(&wsmem, 0, (size_t)B * I * sizeof(int), &ce);
        events = (saltus_event *)saltus_dev_copy(&wsmem, 0, (size_t)B * cap_events * sizeof(saltus_event), &ce);
        xbuf = (saltus_real *)saltus_dev_copy(&wsmem, 0, (size_t)B * cap_x * sizeof(saltus_real), &ce);
        sbuf = (int *)saltus_dev_copy(&wsmem, 0, (size_t)B * cap_s * sizeof(int), &ce);
        queue = (saltus_pending *)saltus_dev_copy(&wsmem, 0, (size_t)B * cap_q * sizeof(saltus_pending), &ce);
        Tbuf = (saltus_real *)saltus_dev_copy(&wsmem, 0, (size_t)B * (cap_events + 1) * sizeof(saltus_real), &ce);
        Tnbuf = (saltus_real *)saltus_dev_copy(&wsmem, 0, (size_t)B * (cap_s + 1) * sizeof(saltus_real), &ce);
        if (ce != cudaSuccess) goto cuda_fail;
        for (b = 0; b < B; b++) {
            saltus_trial_ws *w = &hws[b];
            memset(w, 0, sizeof *w);
            saltus_ws_attach(w, &out->plan, reals + (size_t)b * R, ints + (size_t)b * I);
            w->events = events + (size_t)b * cap_events; w->cap_events = cap_events;
            w->xbuf = xbuf + (size_t)b * cap_x; w->cap_xbuf = cap_x;
            w->sbuf = sbuf + (size_t)b * cap_s; w->cap_sbuf = cap_s;
            w->queue = queue + (size_t)b * cap_q; w->cap_queue = cap_q;
            w->T = Tbuf + (size_t)b * (cap_events + 1); w->cap_T = cap_events + 1;
            w->Tn = Tnbuf + (size_t)b * (cap_s + 1); w->cap_Tn = cap_s + 1;
        }
        dws = (saltus_trial_ws *)saltus_dev_copy(&wsmem, hws, (size_t)B * sizeof(saltus_trial_ws), &ce);
        if (ce != cudaSuccess) goto cuda_fail;
        saltus_forward_kernel<<<blocks, SALTUS_THREADS>>>(dnet, dplan, dws, B);
        ce = cudaGetLastError();
        if (ce == cudaSuccess) ce = cudaDeviceSynchronize();
        if (ce == cudaSuccess) ce = cudaMemcpy(hws, dws, (size_t)B * sizeof(saltus_trial_ws), cudaMemcpyDeviceToHost);
        if (ce != cudaSuccess) goto cuda_fail;
        capacity = 0;
        for (b = 0; b < B; b++) if (hws[b].status == SALTUS_E_CAPACITY) capacity = 1;
        if (!capacity) break;
        cap_events *= 2;
    }
    for (b = 0; b < B; b++) {
        if (hws[b].status != SALTUS_OK) {
            saltus_trial_message(net, &hws[b], &out->plan, msg, sizeof msg);
            snprintf(err, cap, "trial %d: %s", b, msg);
            goto fail;
        }
    }
    dgW = (saltus_real *)saltus_dev_copy(&wsmem, 0, (size_t)B * out->plan.w_total * sizeof(saltus_real), &ce);
    dgP = (saltus_real *)saltus_dev_copy(&wsmem, 0, (size_t)B * (size_t)out->plan.g_total * sizeof(saltus_real), &ce);
    dgD = (saltus_real *)saltus_dev_copy(&wsmem, 0, (size_t)B * out->plan.w_total * sizeof(saltus_real), &ce);
    if (ce != cudaSuccess) goto cuda_fail;
    saltus_backward_kernel<<<blocks, SALTUS_THREADS>>>(dnet, dplan, dws, B, dgW, dgP, dgD);
    ce = cudaGetLastError();
    if (ce == cudaSuccess) ce = cudaDeviceSynchronize();
    hgW = (saltus_real *)malloc(((size_t)B * out->plan.w_total + 1) * sizeof(saltus_real));
    hgP = (saltus_real *)malloc(((size_t)B * (size_t)out->plan.g_total + 1) * sizeof(saltus_real));
    hgD = (saltus_real *)malloc(((size_t)B * out->plan.w_total + 1) * sizeof(saltus_real));
    if (!hgW || !hgP || !hgD) { snprintf(err, cap, "out of memory"); goto fail; }
    if (ce == cudaSuccess) ce = cudaMemcpy(hgW, dgW, (size_t)B * out->plan.w_total * sizeof(saltus_real), cudaMemcpyDeviceToHost);
    if (ce == cudaSuccess) ce = cudaMemcpy(hgP, dgP, (size_t)B * (size_t)out->plan.g_total * sizeof(saltus_real), cudaMemcpyDeviceToHost);
    if (ce == cudaSuccess) ce = cudaMemcpy(hgD, dgD, (size_t)B * out->plan.w_total * sizeof(saltus_real), cudaMemcpyDeviceToHost);
    if (ce == cudaSuccess) ce = cudaMemcpy(hws, dws, (size_t)B * sizeof(saltus_trial_ws), cudaMemcpyDeviceToHost);
    if (ce != cudaSuccess) goto cuda_fail;
    for (b = 0; b < B; b++) {
        saltus_trial_ws *w = &out->trials[b];
        if (hws[b].status != SALTUS_OK) {
            saltus_trial_message(net, &hws[b], &out->plan, msg, sizeof msg);
            snprintf(err, cap, "trial %d: %s", b, msg);
            goto fail;
        }
        for (i = 0; i < out->plan.w_total; i++) out->gW[i] += hgW[(size_t)b * out->plan.w_total + i];
        for (i = 0; i < out->plan.w_total; i++) out->gD[i] += hgD[(size_t)b * out->plan.w_total + i];
        for (i = 0; i < (size_t)out->plan.g_total; i++) out->gP[i] += hgP[(size_t)b * out->plan.g_total + i];
        out->loss += hws[b].loss;
        /* the host copy keeps the trial's loss and its event log (the spikes) */
        w->loss = hws[b].loss;
        w->n_events = hws[b].n_events;
        w->events = (saltus_event *)malloc((hws[b].n_events + 1) * sizeof(saltus_event));
        if (!w->events) { snprintf(err, cap, "out of memory"); goto fail; }
        ce = cudaMemcpy(w->events, hws[b].events, hws[b].n_events * sizeof(saltus_event), cudaMemcpyDeviceToHost);
        if (ce != cudaSuccess) goto cuda_fail;
        w->cap_events = hws[b].n_events + 1;
    }
    free(hws); free(hgW); free(hgP); free(hgD);
    saltus_dev_free(&wsmem);
    saltus_dev_free(&mem);
    return 0;
cuda_fail:
    snprintf(err, cap, "CUDA: %s", cudaGetErrorString(ce));
fail:
    free(hws); free(hgW); free(hgP); free(hgD);
    saltus_dev_free(&wsmem);
    saltus_dev_free(&mem);
    saltus_result_free(out);
    return -1;
}
