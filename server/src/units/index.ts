// Public API of the unit and dimension layer: dimension algebra, bracket-unit parsing
// (mathjs-backed symbol lookup, our own expression grammar) and message formatting.
// Invariant: nothing here throws on bad input; the mathjs instance stays private.

export {
  type Dim,
  BASE_DIMENSION_NAMES,
  DIM_LENGTH,
  DIM_TOLERANCE,
  DIMENSIONLESS,
  MASS,
  LENGTH,
  TIME,
  CURRENT,
  dimFromExponents,
  dimFromArray,
  isValidDim,
  dimMul,
  dimDiv,
  dimPow,
  dimEqual,
  isDimensionless,
  dimKey,
} from './dimension';
export { type UnitParseOk, type UnitParseError, type UnitParseResult, parseUnit } from './unitParse';
export { type SymbolLookup, UNIT_SYMBOL_PATTERN, lookupUnitSymbol } from './unitSymbols';
export { type UnitExpression, formatDim, formatQuantity, formatNumber, describeDim, unitExpressionFor } from './format';
export { type TimeParse, parseTime } from './time';
