// The content hash that every generated file carries in its header, so that Saltus can tell
// a file it wrote (and may replace) from one that was edited since (which it refuses to
// overwrite without --force). The hash line reads
//   <comment> saltus-hash: sha256:<64 hex digits> ...
// and the hash is the SHA-256 of the file's text with that whole line (and its line break)
// removed. Invariants: `stampHash(text)` gives a file that `checkHash` reports as
// unmodified; any change of a byte outside the hash digits makes it report modified.
import { createHash } from 'node:crypto';

export const HASH_PLACEHOLDER = '@@SALTUS_HASH@@';
const LINE = /^.*saltus-hash: sha256:([0-9a-f]{64}|@@SALTUS_HASH@@).*(\r?\n|$)/m;

const sha256 = (text: string): string => createHash('sha256').update(text, 'utf8').digest('hex');

/** Replaces the placeholder on the hash line of `text` with the hash of the rest of the text. */
export function stampHash(text: string): string {
  const m = LINE.exec(text);
  if (!m || m[1] !== HASH_PLACEHOLDER) throw new Error('generated text has no hash line');
  const rest = text.slice(0, m.index) + text.slice(m.index + m[0].length);
  return text.slice(0, m.index) + m[0].replace(HASH_PLACEHOLDER, sha256(rest)) + text.slice(m.index + m[0].length);
}

export type HashCheck =
  | { kind: 'unmodified' }
  | { kind: 'modified'; declared: string; actual: string }
  | { kind: 'foreign' };

/** Whether `text` is a Saltus-generated file unchanged since it was written. */
export function checkHash(text: string): HashCheck {
  const m = LINE.exec(text);
  if (!m || m[1] === HASH_PLACEHOLDER) return { kind: 'foreign' };
  const rest = text.slice(0, m.index) + text.slice(m.index + m[0].length);
  const actual = sha256(rest);
  return actual === m[1] ? { kind: 'unmodified' } : { kind: 'modified', declared: m[1]!, actual };
}
