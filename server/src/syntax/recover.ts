// Token-level recovery before parsing, for two mistakes whose parser errors would mislead:
// - a unit written without brackets after a number (`param tau = 5 ms`): the unit's tokens
//   become one BareUnit token, which the grammar reads as the number's unit, and one error
//   says that units go in brackets, with a fix (`5 [ms]`);
// - a word of no construct that another one replaces (`refractory 2 [ms]` in a neuron: the
//   language writes `quiet for DURATION { FLOWS }`), or a construct planned for a later version
//   after a connection (none at present): its tokens (to the end of the line, and through a
//   `{ ... }` opened on it) are left out, with one 'unsupported' error saying what to write instead.
// It also marks `quiet for` at the start of a member as the two words of a quiet period
// (tokens QuietWord, ForWord), so that the grammar tells it from a jump by one token and
// `quiet` and `for` stay names everywhere else.
// Invariants: linear in the number of tokens; the input array is not modified; every error's
// range lies inside the text.
import { createTokenInstance, type IToken } from 'chevrotain';
import type * as A from './ast';
import { BareUnit, ForWord, QuietWord } from './tokens';
import { parseUnit } from '../units/unitParse';

/** Words that open a member the language writes otherwise, and the message that says how. */
const PLANNED_MEMBERS: Readonly<Record<string, string>> = {
  refractory: "'refractory' is not in the language: a refractory period is written 'quiet for DURATION { dV/dt = 0 }' (the flows listed replace the normal ones for DURATION after each spike, and the neuron cannot fire); this line is left out of the check",
};
const PLANNED_CONNECT: Readonly<Record<string, string>> = {
};
/** Tokens after which an identifier continues an expression rather than starting a member. */
const CONTINUES = new Set(['Plus', 'Minus', 'Star', 'Slash', 'Caret', 'Comma', 'LParen', 'Equals', 'Assign', 'Kw_crosses', 'Kw_when', 'Kw_timestep', 'Compare', 'Arrow', 'Kw_param', 'Kw_state', 'Kw_let', 'Kw_incoming', 'Kw_neuron', 'Kw_connect']);

export interface Recovered { tokens: IToken[]; errors: A.SyntaxError[] }

const end = (t: IToken): number => t.startOffset + t.image.length;

export function recoverTokens(tokens: readonly IToken[], text: string): Recovered {
  const out: IToken[] = [];
  const errors: A.SyntaxError[] = [];
  const sameLine = (from: number, to: number): boolean => !/[\r\n]/.test(text.slice(from, to));
  for (let i = 0; i < tokens.length; i++) {
    const t = tokens[i]!;
    const type = t.tokenType.name;
    const prev = out[out.length - 1];
    if (type === 'Identifier' && tokens[i + 1]?.tokenType.name !== 'Assign') {
      // a construct of the next language version
      const member = Object.hasOwn(PLANNED_MEMBERS, t.image) && !CONTINUES.has(prev?.tokenType.name ?? '')
        && (prev === undefined || !sameLine(end(prev), t.startOffset) || prev.tokenType.name === 'LCurly' || prev.tokenType.name === 'RCurly');
      const afterVia = out[out.length - 2]?.image === 'via' && out[out.length - 3]?.tokenType.name === 'Identifier' && out[out.length - 4]?.tokenType.name === 'Arrow';
      const connect = Object.hasOwn(PLANNED_CONNECT, t.image) && prev?.tokenType.name === 'Identifier'
        && (out[out.length - 2]?.tokenType.name === 'Arrow' || afterVia) && sameLine(end(prev), t.startOffset);
      const next = tokens[i + 1];
      if (t.image === 'quiet' && next?.tokenType.name === 'Identifier' && next.image === 'for' && !CONTINUES.has(prev?.tokenType.name ?? '')
        && (prev === undefined || !sameLine(end(prev), t.startOffset) || prev.tokenType.name === 'LCurly' || prev.tokenType.name === 'RCurly')) {
        out.push(createTokenInstance(QuietWord, t.image, t.startOffset, end(t) - 1, NaN, NaN, NaN, NaN));
        out.push(createTokenInstance(ForWord, next.image, next.startOffset, end(next) - 1, NaN, NaN, NaN, NaN));
        i++;
        continue;
      }
      if (member || connect) {
        const last = plannedExtent(tokens, i, sameLine);
        errors.push({ code: 'unsupported', range: { start: t.startOffset, end: end(tokens[last]!) },
          message: member ? PLANNED_MEMBERS[t.image]!
            : `'${t.image}' is not in the language (yet): ${PLANNED_CONNECT[t.image]!} are planned for its next version; this part is left out of the check` });
        i = last;
        continue;
      }
      // a unit written without brackets right after a number
      if (prev?.tokenType.name === 'NumberLiteral' && sameLine(end(prev), t.startOffset)) {
        const unit = bareUnit(tokens, i, text);
        if (unit) {
          const image = text.slice(t.startOffset, unit.end);
          const bare = createTokenInstance(BareUnit, image, t.startOffset, unit.end - 1, NaN, NaN, NaN, NaN);
          out.push(bare);
          errors.push({ range: { start: t.startOffset, end: unit.end },
            message: `a unit goes in brackets: write '${prev.image} [${image}]'`,
            fixes: [{ title: `Put the unit in brackets: ${prev.image} [${image}]`, edits: [{ range: { start: t.startOffset, end: unit.end }, newText: `[${image}]` }], preferred: true }] });
          i = unit.last;
          continue;
        }
      }
    }
    out.push(t);
  }
  return { tokens: out, errors };
}

/** The last token of a planned construct starting at i: the end of its line, and through a `{ ... }` opened on it. */
function plannedExtent(tokens: readonly IToken[], i: number, sameLine: (a: number, b: number) => boolean): number {
  let last = i, depth = 0;
  for (let k = i + 1; k < tokens.length; k++) {
    const t = tokens[k]!, type = t.tokenType.name;
    if (depth === 0 && !sameLine(end(tokens[last]!), t.startOffset)) break;
    if (depth === 0 && type === 'RCurly') break; // the neuron's own closing brace
    if (type === 'LCurly') depth++;
    if (type === 'RCurly') depth--;
    last = k;
  }
  return last;
}

/**
 * A unit written without brackets at tokens[i]: one unit symbol, or symbols joined without
 * spaces by `*`, `/` and `^` (`mV/ms`, `s^-1`), when the text reads as a unit.
 */
function bareUnit(tokens: readonly IToken[], i: number, text: string): { last: number; end: number } | undefined {
  const first = tokens[i]!;
  if (!parseUnit(first.image).ok) return undefined;
  let best = { last: i, end: end(first) };
  const JOIN = new Set(['Star', 'Slash', 'Caret', 'Minus', 'NumberLiteral', 'Identifier']);
  for (let k = i + 1; k < tokens.length && k < i + 12; k++) {
    const t = tokens[k]!;
    if (!JOIN.has(t.tokenType.name) || t.startOffset !== end(tokens[k - 1]!)) break;
    const candidate = text.slice(first.startOffset, end(t));
    if (t.tokenType.name !== 'Star' && t.tokenType.name !== 'Slash' && t.tokenType.name !== 'Caret' && t.tokenType.name !== 'Minus' && parseUnit(candidate).ok) {
      best = { last: k, end: end(t) };
    }
  }
  return best;
}
