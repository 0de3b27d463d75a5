// Where each diagnostic code is documented, for editors that link a diagnostic to its
// documentation (LSP `codeDescription`): one anchor per code in docs/language.md,
// `#code-<code>`, on the project's web pages. The web root is package.json `homepage` without
// its fragment (`https://host/owner/saltus#readme` -> `https://host/owner/saltus`), and files
// are addressed the way GitHub and GitLab show them: `<root>/blob/main/<path>`.
// Part of the bottom layer (base/): it imports only base/ and package.json.
import type { DiagnosticCode } from './diagnostic';
import { SALTUS_INFORMATION_URI } from './version';

/** The file with the diagnostics table, relative to the repository root. */
export const DIAGNOSTICS_DOC = 'docs/language.md';

/** The web address of a file of the repository, from package.json `homepage`. */
const WEB_ROOT = SALTUS_INFORMATION_URI.replace(/#.*$/, '').replace(/\/+$/, '');

export function repositoryFileUrl(path: string): string {
  return `${WEB_ROOT}/blob/main/${path}`;
}

/** The id of a code's row in docs/language.md. */
export const diagnosticAnchor = (code: DiagnosticCode): string => `code-${code}`;

/** Where `code` is documented: docs/language.md#code-<code>. */
export const diagnosticDocsUrl = (code: DiagnosticCode): string => `${repositoryFileUrl(DIAGNOSTICS_DOC)}#${diagnosticAnchor(code)}`;
