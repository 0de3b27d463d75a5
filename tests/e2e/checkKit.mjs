// Small pieces every end-to-end check file uses: Skip (a feature not in this build yet),
// expect (throw with a message that says what the window showed), lineOf (find a line of a
// sample by its text, so checks do not hard-code line numbers).
// Invariants: no state; nothing here touches the UI.

/** Thrown by a check whose feature this build does not have yet; the run reports it as SKIP. */
export class Skip extends Error {}

/** 1-based line of the first line of `text` that contains `needle`. */
export function lineOf(text, needle) {
  const i = text.split('\n').findIndex((l) => l.includes(needle));
  if (i < 0) throw new Error(`the sample no longer contains "${needle}"`);
  return i + 1;
}

export function expect(cond, msg) {
  if (!cond) throw new Error(msg);
}
