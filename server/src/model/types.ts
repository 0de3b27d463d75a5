// The resolved model: what the analyses and derivations consume. Every expression is a
// Sym in SI units (literals and parameter values converted), `let`s inlined, names bound.
//
// Architecture invariant: a ResolvedNeuron with `wellFormed === true` has a flow Sym for
// every state that has one, guard/jump Syms whose free symbols are only its own states,
// params, `t` (and the weight inside `incoming`), and consistent dimensions. Analyses and
// derivations run only on well-formed neurons; others get diagnostics and nothing more.
import type * as A from '../syntax/ast';
import type { Sym } from '../symbolic/sym';
import type { Dim } from '../units/dimension';
import type { Diagnostic } from '../base/diagnostic';

export type SymbolKind = 'param' | 'state' | 'let' | 'weight' | 'neuron';

export interface SymbolInfo {
  kind: SymbolKind;
  name: string;
  /** The identifier at the declaration (go to definition lands here). */
  nameRange: A.Range;
  /** The whole declaration (for document symbols). */
  declRange: A.Range;
  doc?: string;
  /** Dimension, when it could be determined. */
  dim?: Dim;
  /** The unit text a modeller wrote for it (or inherited), for display, e.g. "ms". */
  unitText?: string;
  /** The neuron it belongs to (undefined for neuron symbols). */
  neuron?: string;
}

export interface ParamInfo extends SymbolInfo {
  kind: 'param';
  trainable: boolean;
  /** Value in SI units, when it is a constant that evaluates. */
  valueSI?: number;
}

export interface StateInfo extends SymbolInfo {
  kind: 'state';
  /** Initial value in SI units (0 when omitted). */
  initialSI: number;
}

export interface LetInfo extends SymbolInfo {
  kind: 'let';
  /** The inlined expression (SI), when it resolved. */
  value?: Sym;
}

export interface FireInfo {
  lhs: Sym;
  rhs: Sym;
  /** g = lhs - rhs; the event happens where g reaches 0 in `direction`. */
  guard: Sym;
  direction: A.Direction;
  /** Jump maps x+ = h(x-): only states that jump appear. */
  jumps: Map<string, Sym>;
  decl: A.FireBlock;
}

export interface IncomingInfo {
  weight: string;
  /** The weight's symbol (a connection's `via` refers to it). */
  symbol: SymbolInfo;
  weightDim?: Dim;
  weightUnit?: string;
  /** Jump maps y+ = r(y-, w): only states that jump appear. */
  jumps: Map<string, Sym>;
  decl: A.IncomingBlock;
}

/** `surrogate EXPR (detaching X, Y)?` (e-prop): psi = dz/dg, SI, lets inlined. */
export interface SurrogateInfo {
  psi: Sym;
  /** States whose spike jump is treated as independent of the spike (stop-gradient), in the order written. */
  detaching: string[];
  decl: A.SurrogateDecl;
}

/**
 * `quiet for DURATION { FLOWS }` (docs/language.md "Quiet periods"): for `duration` seconds
 * after each spike the listed flows replace the normal ones and the neuron cannot fire.
 */
export interface QuietInfo {
  /** The duration, SI seconds, an expression of parameters only (lets inlined). */
  duration: Sym;
  /** dX/dt during the quiet period for the listed states (others keep their normal flow). */
  flows: Map<string, Sym>;
  flowDecls: Map<string, A.FlowEq>;
  decl: A.QuietBlock;
}

export interface ResolvedNeuron {
  name: string;
  doc?: string;
  decl: A.NeuronDecl;
  symbol: SymbolInfo;
  params: ParamInfo[];
  states: StateInfo[];
  lets: LetInfo[];
  /** dX/dt = f_X, SI, lets inlined. States without a flow are absent (constant between events). */
  flows: Map<string, Sym>;
  /** Flow ASTs by state, for ranges. */
  flowDecls: Map<string, A.FlowEq>;
  fire?: FireInfo;
  /** The `incoming` blocks (receptors) in the order written, told apart by their weight names (v0: at most one). */
  receptors: IncomingInfo[];
  /** The first incoming block (v0's only one); every stage reads `receptors`. */
  incoming?: IncomingInfo;
  surrogate?: SurrogateInfo;
  quiet?: QuietInfo;
  wellFormed: boolean;
}

/** One use of a name in the text and what it resolves to. */
export interface Reference { range: A.Range; target: SymbolInfo }

/** A projection: spikes of `from` reach the `incoming` block of `to` whose weight is `via`
 *  (set when `to` has several blocks or the line names one; absent: its only block);
 *  `delaySI`: its transmission delay in seconds (>= 0) when `delay D` is written and valid. */
export interface Connection { from: string; to: string; via?: string; decl?: A.ConnectDecl; implicit: boolean; delaySI?: number }

export interface ResolvedFile {
  neurons: ResolvedNeuron[];
  /** The file's timestep in seconds, when declared and valid. */
  timestepSI?: number;
  timestepDecl?: A.TimestepDecl;
  /** Declared projections, or the implicit self-projections (docs/language.md) when none is declared. */
  connections: Connection[];
  /** Every symbol declared in the file and every use of one. */
  symbols: SymbolInfo[];
  references: Reference[];
  /** Unit texts written in the file, used to word messages in the modeller's units. */
  unitsUsed: string[];
  diagnostics: Diagnostic[];
  /** Dimension of every resolved expression node (for hovers and inlay hints). */
  exprDims: Map<A.Expr, Dim>;
}
