// Public API of code generation (docs/codegen.md): `generateFiles` (pure: analysis -> file
// texts), `writeGenerated` (safe, atomic writing into one directory), the TypeScript
// reference loop that generated drivers are tested against, and the hash check.
export { generateFiles, TARGETS, type Target, type GenerateOptions, type GenerateResult, type GeneratedFile } from './generate';
export { writeGenerated, unsafeName, type WriteOptions, type WriteResult } from './write';
export { checkHash, type HashCheck } from './hash';
export type { Renaming } from './names';
