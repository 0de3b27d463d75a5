// Public surface of the symbolic engine: Sym data, canonical normalisation, exact
// derivatives, numeric evaluation/compilation, printers and the mathjs-text reader.

export * from './sym';
export * from './normalise';
export * from './derivative';
export * from './evaluate';
export * from './errorBound';
export * from './print';
export { expdd, phi1 } from './expdd';
