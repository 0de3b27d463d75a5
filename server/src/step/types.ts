// The types of the step stage (schemes, propagators, reports), in one file with no code, so
// the stage's modules import them from here and not from each other (no import circles).
import type { Sym } from '../symbolic/sym';
import type { Compiled } from '../symbolic/evaluate';
import type { Mat } from './linalg';

export type SchemeLabel = 'exact' | 'exponential-euler' | 'linearised-exponential-euler';
/** The scheme of a state's update in the step map that generated code and the grid use (map.ts). */
export type MapSchemeLabel = 'exact' | 'exponential-rk4';

/** held: no flow; affine: exact split a_i x_i + b_i; linearised: a_i = df_i/dx_i at the state. */
export type SchemeKind = 'held' | 'affine' | 'linearised';

export interface StateScheme {
  name: string;
  kind: SchemeKind;
  /** The label of the JSON contract: 'exact' when this state's update is its exact flow
   *  (held, or a_i and b_i constant during a step). */
  label: SchemeLabel;
  reason: string;
  /** f_i, normalised (undefined for a held state). */
  flow?: Sym;
  /** a_i: the coefficient of x_i (affine) or df_i/dx_i (linearised); 0 when held. */
  a: Sym;
  /** b_i = f_i with x_i = 0 (affine only; linearised b_i = f_i - a_i x_i is numeric). */
  b?: Sym;
}

export interface StepScheme {
  neuron: string;
  /** All states in declaration order: the layout of every state vector x. */
  states: string[];
  /** Parameters in declaration order and their SI values (NaN when a value is missing). */
  params: string[];
  paramValues: Float64Array;
  initial: Float64Array;
  /** Indices (into `states`) of the states that have a flow: the order of M, J and P. */
  dynamic: number[];
  entries: StateScheme[];
  /** Variable layout of the compiled closures: states, params, 't', then extra symbols (0). */
  vars: string[];
  problems: string[];
  /** @internal compiled pieces, indexed like `dynamic` (rows) and `dynamic` (columns). */
  compiled: {
    f: Compiled[];
    a: Compiled[];
    b: (Compiled | null)[];
    J: Compiled[][];
    /** d a_i / d x_j */
    H: Compiled[][];
  };
  /** Symbolic Jacobian of the dynamic flows with respect to every state (rows: dynamic). */
  jacobianSym: Sym[][];
}

/** Parameter values: a vector in `scheme.params` order, or by name; omitted ones are the neuron's. */
export type ParamInput = Float64Array | Readonly<Record<string, number>> | undefined;

export interface LtiStructure {
  linear: boolean;
  /** Why the flow is or is not LTI, in words. */
  reason: string;
  /** f = A x + c over all states (rows of held states are 0); present when linear. */
  A?: Sym[][];
  c?: Sym[];
}

export interface ExactPropagator {
  /** All states, in declaration order: the rows and columns of `matrix`. */
  states: string[];
  dt: number;
  A: Mat;
  c: number[];
  /** P = e^{A dt} */
  matrix: Mat;
  /** q = int_0^dt e^{A s} ds c */
  offset: number[];
  method: 'closed-form' | 'pade';
}

export interface StepStateReport {
  name: string;
  /** The scheme of this state in the step map: its exact flow, or fourth-order exponential Runge-Kutta. */
  scheme: MapSchemeLabel;
  /** How the flow splits in this state (held, affine, or linearised for the frozen linear part). */
  kind: SchemeKind;
  reason: string;
  /** Unit written for the state (for display and Newton's coordinates), and its SI size. */
  unit: string;
  scale: number;
}

export interface StepReport {
  neuron: string;
  dt_s: number;
  states: StepStateReport[];
  /** The states with a flow: the rows and columns of jacobian, stepMatrix, flowPropagator. */
  order: string[];
  reference: { kind: 'rest' | 'initial'; values: Record<string, number>; note: string };
  /** J = df/dx at the reference (SI). */
  jacobian: Mat;
  /** M: Jacobian of one grid step of the step map (all its sub-steps) at the reference (SI). */
  stepMatrix: Mat;
  /** P = expm(J dt) (SI). */
  flowPropagator: Mat;
  stepRadius: number;
  exactRadius: number;
  /** ||M - P||_F / ||P||_F in the coordinates of scaling.ts. */
  relativeStepError: number;
  /** The linearised flow has no growing mode that the step does not also have (see docs). */
  stable: boolean;
  /** The `step-unstable` condition: the step amplifies a mode that the flow damps, at dt. */
  unstable: boolean;
  /** Largest dt up to which the step is stable; null when stable at every dt scanned. */
  maxStableDt_s: number | null;
  stabilityNote: string;
  accuracyBound: number;
  accurate: boolean;
  /** Largest dt with relativeStepError <= accuracyBound; null when never exceeded in the scan. */
  accurateDt_s: number | null;
  lti: { linear: boolean; reason: string };
  exactPropagator: ExactPropagator | null;
  /** The step map judged here: exact (then never unstable or inaccurate) or ETDRK4 in sub-steps. */
  map: { scheme: MapSchemeLabel; exact: boolean; reason: string; substeps: number };
  recommended: 'exact-propagator' | SchemeLabel | MapSchemeLabel;
  crossing: CrossingReport | null;
  problems: string[];
  /** The same analysis of the quiet mode (`quiet for`: its flows replace the listed ones,
   *  no threshold), for a neuron with a quiet period; absent otherwise. */
  quiet?: StepReport;
}

export interface CrossingReport {
  method: string;
  /** g, dg/dt and d2g/dt2 along the flow. */
  guard: Sym;
  rate: Sym;
  curvature: Sym;
  direction: 'up' | 'down' | 'either';
  /** The bound as a formula, in words. */
  bound: string;
  /** The probe crossing and the bound there, or null with `probeNote` saying why. */
  probe: {
    state: Float64Array; movedState: string; rate: number; curvature: number;
    /** dt^2 |g''| / (8 |g'|) at the probe. */
    interpolationBound_s: number;
    /** min(interpolationBound_s, dt): the located time never leaves the step. */
    timeError_s: number;
  } | null;
  probeNote: string;
  /** Error bound without interpolation: dt. */
  gridBound_s: number;
}
