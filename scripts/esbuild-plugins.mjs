// esbuild plugins shared by the build (scripts/build.mjs) and the tests that bundle the
// server themselves: `import text from './file.py?raw'` inlines a file's text, as vite does.
import { readFileSync } from 'node:fs';
import { resolve } from 'node:path';

export const rawTextPlugin = {
  name: 'raw-text',
  setup(b) {
    b.onResolve({ filter: /\?raw$/ }, (args) => ({ path: resolve(args.resolveDir, args.path.slice(0, -4)), namespace: 'raw-text' }));
    b.onLoad({ filter: /.*/, namespace: 'raw-text' }, (args) => ({ loader: 'text', contents: readFileSync(args.path, 'utf8') }));
  },
};
