// The tool's version and home page, read from package.json at build time (esbuild inlines
// the JSON), so `saltus --version` and SARIF's tool.driver never disagree with the package.
import pkg from '../../../package.json';

const meta = pkg as { version?: string; homepage?: string; repository?: string | { url?: string } };

export const SALTUS_VERSION: string = meta.version ?? '0.0.0';

/** An absolute URI for the project: homepage, else the repository URL without `.git`. */
export const SALTUS_INFORMATION_URI: string = (() => {
  if (meta.homepage) return meta.homepage;
  const repo = typeof meta.repository === 'string' ? meta.repository : meta.repository?.url;
  if (repo && /^https?:\/\//.test(repo)) return repo.replace(/\.git$/, '');
  return 'https://example.invalid/saltus';
})();
