// Progress of a long `saltus crosscheck` on stderr. After the first simulation the check
// knows its cost (simulations planned x the first one's time); a run estimated under
// QUIET_BELOW_MS (on a terminal) or LINE_INTERVAL_MS (a file or pipe, where a short run
// should leave stderr empty) prints nothing. Otherwise it announces the estimate once, then
// keeps one line up to date on a terminal, or writes an occasional line (every
// LINE_INTERVAL_MS) to a file or pipe, and says when it is done.
// Invariant: writes only through `sink.write`; never to stdout (which carries the report).
import type { CrossCheckProgress } from '../crosscheck/index';

export interface ProgressSink {
  write(text: string): void;
  /** stderr is a terminal: one line that updates in place. */
  tty: boolean;
  /** Milliseconds, monotonic. */
  now(): number;
}

export const QUIET_BELOW_MS = 2000;
export const LINE_INTERVAL_MS = 10_000;
const TTY_INTERVAL_MS = 150;

/** '3 min 20 s', '12 s', '850 ms'. */
export function duration(ms: number): string {
  if (!Number.isFinite(ms) || ms < 0) return '?';
  if (ms < 1000) return `${Math.round(ms)} ms`;
  const s = Math.round(ms / 1000);
  if (s < 60) return `${s} s`;
  const m = Math.floor(s / 60);
  if (m < 60) return `${m} min${s % 60 ? ` ${s % 60} s` : ''}`;
  return `${Math.floor(m / 60)} h${m % 60 ? ` ${m % 60} min` : ''}`;
}

const count = (n: number): string => n.toLocaleString('en-US');

export function progressReporter(sink: ProgressSink): { update(p: CrossCheckProgress): void; end(): void } {
  const t0 = sink.now();
  let active = false, decided = false, last = -Infinity, lineOpen = false;
  const status = (p: CrossCheckProgress): string => {
    const elapsed = sink.now() - t0;
    const left = p.done > 0 ? (elapsed / p.done) * Math.max(0, p.total - p.done) : NaN;
    return `saltus crosscheck: ${count(p.done)}/${count(p.total)} simulations (${p.phase}), ${duration(elapsed)} so far, about ${duration(left)} left`;
  };
  return {
    update(p) {
      if (!decided && p.estimate_ms !== undefined) {
        decided = true;
        active = p.estimate_ms >= (sink.tty ? QUIET_BELOW_MS : LINE_INTERVAL_MS);
        if (active) {
          const hint = p.sample ? ` (a sample of ${count(p.sample.rows)} of ${count(p.sample.of)} rows)` : '; --sample N checks N of the rows (seeded, --seed S)';
          sink.write(`saltus crosscheck: ${count(p.total)} simulations planned; the first (the whole network) took ${duration(p.firstSimulation_ms ?? 0)}, so this takes about ${duration(p.estimate_ms)}${hint}\n`);
        }
        last = sink.now();
        return;
      }
      if (!active) return;
      const t = sink.now();
      if (sink.tty) {
        if (t - last < TTY_INTERVAL_MS) return;
        sink.write(`\r\x1b[K${status(p)}`);
        lineOpen = true;
      } else {
        if (t - last < LINE_INTERVAL_MS) return;
        sink.write(`${status(p)}\n`);
      }
      last = t;
    },
    end() {
      if (!active) return;
      if (sink.tty && lineOpen) sink.write('\r\x1b[K');
      sink.write(`saltus crosscheck: done in ${duration(sink.now() - t0)}\n`);
    },
  };
}
