// Text assets bundled into the build (`import text from './file.py?raw'`): generated code's
// fixed runtime files, kept as real source files in the repository. esbuild (scripts/build.mjs)
// and vite (vitest) both inline them as strings.
declare module '*?raw' {
  const text: string;
  export default text;
}
