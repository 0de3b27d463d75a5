// Identifiers of generated code (docs/codegen.md, "Names"). A model's names become C, CUDA
// and Python identifiers; any that is a keyword of one of those languages, a name of their
// standard headers or modules that the generated code relies on, or a name the generated
// code uses itself, is renamed by appending `_` (repeatedly, until it is free). The same
// renaming is used in every target, so a state is called the same in C, CUDA and NumPy, and
// every renaming is reported.
//
// Invariants: every identifier returned matches /^[A-Za-z][A-Za-z0-9_]*$/ minus the reserved
// sets below, contains no `__` and does not start with `_`; renaming is a pure function of the
// model's names; distinct model names never map to the same identifier.

const C_KEYWORDS = `auto break case char const continue default do double else enum extern float for goto if inline
int long register restrict return short signed sizeof static struct switch typedef union unsigned void volatile while`;
/** C++ keywords (CUDA sources are C++) and CUDA's built-in variables and qualifiers. */
const CXX_CUDA = `alignas alignof and and_eq asm bitand bitor bool catch char8_t char16_t char32_t class compl concept
const_cast consteval constexpr constinit co_await co_return co_yield decltype delete dynamic_cast explicit export false
friend mutable namespace new noexcept not not_eq nullptr operator or or_eq private protected public reinterpret_cast
requires static_assert static_cast template this thread_local throw true try typeid typename using virtual wchar_t xor
xor_eq threadIdx blockIdx blockDim gridDim warpSize dim3 cudaStream_t cudaError_t`;
const PY_KEYWORDS = `False None True and as assert async await break class continue def del elif else except finally for
from global if import in is lambda nonlocal not or pass raise return try while with yield match case type`;
/** Names from <math.h>, <stdio.h>, <stdlib.h> and NumPy that generated code uses (or that are macros). */
const LIBRARY = `exp expf expm1 expm1f log logf sqrt sqrtf tanh tanhf pow powf fabs fabsf fmin fminf fmax fmaxf ldexp ldexpf
frexp isfinite isnan isinf NAN INFINITY HUGE_VAL EOF NULL stdin stdout stderr printf fprintf scanf qsort malloc realloc
free main exit EXIT_SUCCESS EXIT_FAILURE size_t np numpy math abs float int range len dict min max`;
/** Names the generated functions use for their own parameters and temporaries. */
export const INTERNAL_NAMES = `n_neurons idx state coeffs par t t_start dt guard_before spiked spike_time pre weights received adj
fwd loss_source grads weight_grad coupling_out couplings dlp_dts lV_pres lV_posts g_start g_end crossed spikes step_a step_b
step_z count phi coupling dlp_dt lV_pre lV_post gdot P Q q M E out record aug expo value name mask x p lam dx weight X`;

const words = (s: string): string[] => s.split(/\s+/).filter(Boolean);
export const RESERVED: ReadonlySet<string> = new Set([...words(C_KEYWORDS), ...words(CXX_CUDA), ...words(PY_KEYWORDS),
  ...words(LIBRARY), ...words(INTERNAL_NAMES)]);

/** File base names that would shadow a standard C header or a Python module next to them. */
const SHADOWING_FILES = new Set(words(`assert complex ctype errno fenv float inttypes iso646 limits locale math setjmp signal stdarg
stdbool stddef stdint stdio stdlib string tgmath time wchar wctype numpy np scipy torch os sys io re json random types typing
copy abc array ast base64 collections csv ctypes dataclasses decimal enum functools gc glob hashlib heapq inspect itertools
logging operator pathlib pickle platform queue select shutil socket statistics struct subprocess tempfile threading timeit
token tokenize unittest uuid warnings weakref zipfile`).map((w) => w.toLowerCase()));

export const IDENTIFIER = /^[A-Za-z_][A-Za-z0-9_]*$/;

export interface Renaming {
  model: string;
  kind: 'model' | 'state' | 'param' | 'weight';
  from: string;
  to: string;
  reason: string;
}

function reasonFor(name: string, asFile: boolean, prefix?: string): string | null {
  if (!IDENTIFIER.test(name)) return 'not an identifier';
  if (prefix && (name === prefix || name.startsWith(prefix + '_'))) return 'the generated code uses the model name as the prefix of its own global names';
  if (name.startsWith('_') || name.includes('__')) return 'a leading underscore or a double underscore is reserved in C and C++';
  if (words(C_KEYWORDS).includes(name)) return 'a C keyword';
  if (words(CXX_CUDA).includes(name)) return 'a C++/CUDA keyword or built-in';
  if (words(PY_KEYWORDS).includes(name)) return 'a Python keyword';
  if (words(LIBRARY).includes(name)) return 'a name of the C library or NumPy that the generated code uses';
  if (words(INTERNAL_NAMES).includes(name)) return 'a name the generated code uses for its own variables';
  if (asFile && SHADOWING_FILES.has(name.toLowerCase())) return 'its file would shadow a standard C header or Python module';
  return null;
}

/** A safe spelling: non-identifier characters become `_`, a leading `_`/digit gets `m`, `__` collapses. */
function sanitise(name: string): string {
  let s = name.replace(/[^A-Za-z0-9_]/g, '_').replace(/_{2,}/g, '_');
  if (!/^[A-Za-z]/.test(s)) s = 'm' + s;
  return s;
}

/** The first free name among the sanitised spelling (when it differs from the original), base_,
 *  base2, base3, ..., then xbase1, ... (always terminates). */
function freeName(base: string, busy: (s: string) => boolean, original: string): string {
  const candidates = [...(base !== original ? [base] : []), base + '_'];
  for (let k = 2; k < 1000; k++) candidates.push(base + k);
  for (const c of candidates) if (!busy(c)) return c;
  for (let k = 1; ; k++) if (!busy(`x${base}${k}`)) return `x${base}${k}`;
}

/** Renames one model's names (states, params, weight); `prefix` is the model's own identifier. */
export function renameAll(names: readonly { name: string; kind: Renaming['kind'] }[], model: string, prefix: string,
  taken: Set<string> = new Set()): { ids: Map<string, string>; renamed: Renaming[] } {
  const ids = new Map<string, string>();
  const renamed: Renaming[] = [];
  // names that need no change keep them; the others are placed after, avoiding all of these
  const keep = names.filter((n) => reasonFor(n.name, false, prefix) === null);
  for (const n of keep) { ids.set(n.name, n.name); taken.add(n.name); }
  for (const n of names) {
    if (ids.has(n.name)) continue;
    const reason = reasonFor(n.name, false, prefix)!;
    const id = freeName(sanitise(n.name), (s) => taken.has(s) || reasonFor(s, false, prefix) !== null, n.name);
    ids.set(n.name, id);
    taken.add(id);
    renamed.push({ model, kind: n.kind, from: n.name, to: id, reason });
  }
  return { ids, renamed };
}

/** Model names of one file: also unique without regard to case (file names on macOS and Windows). */
export function renameModels(models: readonly string[]): { ids: Map<string, string>; renamed: Renaming[] } {
  const ids = new Map<string, string>();
  const renamed: Renaming[] = [];
  const lower = new Set<string>();
  for (const m of models) {
    let reason = reasonFor(m, true);
    if (reason === null && lower.has(m.toLowerCase())) reason = 'another model of the file differs from it only in letter case (file names would clash)';
    if (reason === null) { ids.set(m, m); lower.add(m.toLowerCase()); continue; }
    const id = freeName(sanitise(m), (s) => reasonFor(s, true) !== null || lower.has(s.toLowerCase()), m);
    ids.set(m, id);
    lower.add(id.toLowerCase());
    renamed.push({ model: m, kind: 'model', from: m, to: id, reason });
  }
  return { ids, renamed };
}
