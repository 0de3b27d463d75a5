"""Training demo of the PyTorch target (run by scripts/demo.mjs; needs only torch and the package
that `saltus generate samples/lif_current.saltus --target torch --out DIR` writes).

An invented task: a made-up fan-bearing vibration sensor reports through 8 frequency-band
channels; each of three conditions (healthy, imbalance, worn bearing) makes the channels fire
at their own latencies after a shaft-index pulse, three of them twice (3 ms apart). Trials are
generated procedurally with a seed: each channel fires at its condition's latency plus 1.5 ms
jitter (or drops out with probability 0.1), and 2 background spikes fall anywhere. A two-layer network of the sample's
models (8 -> 20 LifCurrent spiking neurons -> 3 Readout integrators) is trained with
torch.optim.Adam on the cross-entropy of the readouts' largest membrane value (times SCALE) for a
few epochs on CPU; the gradient is the generated layers' exact event-based backward pass, reaching
the hidden layer through its spike times.

Usage: python3 scripts/train_demo.py PACKAGE_DIR OUT_DIR [--epochs N]
Writes OUT_DIR/learning-curve.svg and OUT_DIR/training.json; prints per-epoch loss, accuracy,
time and the bytes the backward pass kept.
"""
import importlib
import json
import math
import os
import sys
import time

import torch

CHANNELS, CLASSES, HIDDEN = 8, 3, 20
DURATION, DT, SCALE = 0.03, 0.001, 5.0
TRIALS, TRAIN, BATCH = 300, 240, 60
CLASS_NAMES = ["healthy", "imbalance", "worn bearing"]


def make_task(seed=7):
    """Seeded spike patterns: (times (N, K), index (N, K), labels (N,)), padding +inf / -1."""
    g = torch.Generator().manual_seed(seed)
    templates = 0.002 + 0.016 * torch.rand(CLASSES, CHANNELS, generator=g, dtype=torch.float64)
    loud = [torch.randperm(CHANNELS, generator=g)[:3].tolist() for _ in range(CLASSES)]
    rows, labels = [], []
    for k in range(TRIALS):
        c = k % CLASSES
        spikes = []
        jitter = 0.0015 * torch.randn(CHANNELS, generator=g, dtype=torch.float64)
        keep = torch.rand(CHANNELS, generator=g) > 0.1
        for ch in range(CHANNELS):
            if keep[ch]:
                t = float(torch.clamp(templates[c, ch] + jitter[ch], 0.0, DURATION - DT))
                spikes.append((t, ch))
                if ch in loud[c] and t + 0.003 < DURATION:
                    spikes.append((t + 0.003, ch))
        for _ in range(2):
            spikes.append((float(0.025 * torch.rand(1, generator=g, dtype=torch.float64)), int(torch.randint(CHANNELS, (1,), generator=g))))
        rows.append(spikes)
        labels.append(c)
    perm = torch.randperm(TRIALS, generator=g)
    rows = [rows[i] for i in perm.tolist()]
    labels = torch.tensor(labels)[perm]
    return rows, labels


def svg_curve(history, path):
    """The learning curve (training loss and test accuracy per epoch) as a small SVG file."""
    W, H, L, R, T, B = 640, 360, 70, 70, 40, 50
    n = len(history)
    losses = [h["train_loss"] for h in history]
    accs = [h["test_accuracy"] for h in history]
    lmax = max(losses) * 1.1
    x = lambda i: L + (W - L - R) * (i / max(1, n - 1))
    yl = lambda v: T + (H - T - B) * (1 - v / lmax)
    ya = lambda v: T + (H - T - B) * (1 - v)
    out = ['<svg xmlns="http://www.w3.org/2000/svg" width="%d" height="%d" viewBox="0 0 %d %d" font-family="sans-serif" font-size="12">' % (W, H, W, H),
           '<rect width="100%" height="100%" fill="white"/>',
           '<text x="%d" y="22" font-size="14">Invented fan-bearing sensor task: 8 inputs, 20 LifCurrent, 3 Readout; exact event-based gradient</text>' % 20,
           '<line x1="%d" y1="%d" x2="%d" y2="%d" stroke="black"/>' % (L, H - B, W - R, H - B),
           '<line x1="%d" y1="%d" x2="%d" y2="%d" stroke="black"/>' % (L, T, L, H - B),
           '<line x1="%d" y1="%d" x2="%d" y2="%d" stroke="black"/>' % (W - R, T, W - R, H - B)]
    for i in range(n):
        out.append('<text x="%.1f" y="%d" text-anchor="middle">%d</text>' % (x(i), H - B + 18, i))
    out.append('<text x="%d" y="%d" text-anchor="middle">epoch (0: before training)</text>' % ((L + W - R) // 2, H - 12))
    for k in range(5):
        v = lmax * k / 4
        out.append('<text x="%d" y="%.1f" text-anchor="end" fill="#b03a2e">%.2f</text>' % (L - 6, yl(v) + 4, v))
        out.append('<text x="%d" y="%.1f" fill="#1f618d">%d%%</text>' % (W - R + 6, ya(k / 4) + 4, 25 * k))
        out.append('<line x1="%d" y1="%.1f" x2="%d" y2="%.1f" stroke="#dddddd"/>' % (L, ya(k / 4), W - R, ya(k / 4)))
    chance = ya(1 / CLASSES)
    out.append('<line x1="%d" y1="%.1f" x2="%d" y2="%.1f" stroke="#1f618d" stroke-dasharray="4 4"/>' % (L, chance, W - R, chance))
    out.append('<text x="%d" y="%.1f" fill="#1f618d">chance</text>' % (W - R - 50, chance - 4))
    out.append('<polyline fill="none" stroke="#b03a2e" stroke-width="2" points="%s"/>' % " ".join("%.1f,%.1f" % (x(i), yl(v)) for i, v in enumerate(losses)))
    out.append('<polyline fill="none" stroke="#1f618d" stroke-width="2" points="%s"/>' % " ".join("%.1f,%.1f" % (x(i), ya(v)) for i, v in enumerate(accs)))
    out.append('<text x="%d" y="%d" fill="#b03a2e">training loss (cross-entropy; epoch 0: before training, test set)</text>' % (L + 10, H - B - 30))
    out.append('<text x="%d" y="%d" fill="#1f618d">test accuracy (60 held-out trials)</text>' % (L + 10, H - B - 14))
    out.append('</svg>')
    with open(path, "w", encoding="utf-8") as f:
        f.write("\n".join(out) + "\n")


def main(argv):
    if len(argv) < 2:
        raise SystemExit(__doc__)
    pkg_dir, out_dir = os.path.abspath(argv[0]), os.path.abspath(argv[1])
    epochs = int(argv[argv.index("--epochs") + 1]) if "--epochs" in argv else 3
    sys.path.insert(0, os.path.dirname(pkg_dir))
    pkg = importlib.import_module(os.path.basename(pkg_dir))
    os.makedirs(out_dir, exist_ok=True)
    torch.manual_seed(3)
    torch.set_num_threads(1)

    rows, labels = make_task()
    times, index = pkg.pad_events(rows)
    hidden = pkg.LifCurrentLayer(CHANNELS, HIDDEN, DT, DURATION, trainable=(), weight_std=1.0, weight_mean=1.0)
    output = pkg.ReadoutLayer(HIDDEN, CLASSES, DT, DURATION, trainable=(), readout=("max", "V"), weight_std=0.5)
    params = list(hidden.parameters()) + list(output.parameters())
    opt = torch.optim.Adam(params, lr=0.15)

    def run(sl):
        h = hidden(times[sl], index[sl])
        o = output(h.times, h.index)
        return SCALE * o.readout, h, o

    def evaluate():
        """Test loss and accuracy on the held-out trials."""
        with torch.no_grad():
            logits, h, _ = run(slice(TRAIN, TRIALS))
        loss = float(torch.nn.functional.cross_entropy(logits, labels[TRAIN:]))
        acc = float((logits.argmax(1) == labels[TRAIN:]).double().mean())
        return loss, acc, int((h.index >= 0).sum())

    history = []
    t0 = time.perf_counter()
    loss0, acc0, sp0 = evaluate()
    history.append({"epoch": 0, "train_loss": loss0, "test_loss": loss0, "test_accuracy": acc0, "seconds": 0.0, "cpu_seconds": 0.0, "kept_bytes": 0})
    print("epoch 0: test loss %.3f, test accuracy %.1f%% (chance %.1f%%), %d hidden spikes on the %d test trials (%.1f s)" % (loss0, 100 * acc0, 100 / CLASSES, sp0, TRIALS - TRAIN, time.perf_counter() - t0))
    for epoch in range(1, epochs + 1):
        t0, c0 = time.perf_counter(), time.process_time()
        kept = 0
        order = torch.randperm(TRAIN)
        total = 0.0
        for b in range(0, TRAIN, BATCH):
            sel = order[b:b + BATCH]
            h = hidden(times[sel], index[sel])
            o = output(h.times, h.index)
            loss = torch.nn.functional.cross_entropy(SCALE * o.readout, labels[sel])
            kept = max(kept, hidden.last_kept_bytes + output.last_kept_bytes)
            opt.zero_grad()
            loss.backward()
            opt.step()
            total += float(loss) * len(sel)
        seconds, cpu = time.perf_counter() - t0, time.process_time() - c0
        te_loss, acc, spikes = evaluate()
        history.append({"epoch": epoch, "train_loss": total / TRAIN, "test_loss": te_loss, "test_accuracy": acc, "seconds": seconds, "cpu_seconds": cpu, "kept_bytes": kept})
        print("epoch %d: training loss %.3f (mean over the epoch's batches), test loss %.3f, test accuracy %.1f%%, %.1f s (%.1f s CPU), backward pass kept %.0f KiB per batch of %d"
              % (epoch, total / TRAIN, te_loss, 100 * acc, seconds, cpu, kept / 1024, BATCH))
    svg_curve(history, os.path.join(out_dir, "learning-curve.svg"))
    with open(os.path.join(out_dir, "training.json"), "w", encoding="utf-8") as f:
        json.dump({"task": "fan-bearing sensor, %d trials (%d train, %d test), %d classes" % (TRIALS, TRAIN, TRIALS - TRAIN, CLASSES), "history": history}, f, indent=1)
    first, last = history[0], history[-1]
    ok = last["train_loss"] < first["train_loss"] and last["test_accuracy"] > 1.5 / CLASSES
    print("%s: loss %.3f -> %.3f, test accuracy %.1f%% -> %.1f%%; learning curve: %s" % ("OK" if ok else "FAIL", first["train_loss"], last["train_loss"],
          100 * first["test_accuracy"], 100 * last["test_accuracy"], os.path.join(out_dir, "learning-curve.svg")))
    return 0 if ok else 1


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
