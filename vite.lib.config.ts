/**
 * The library build (`npm run build:lib`, run by `prepack`): what the package ships in lib/.
 *
 *   lib/index.js                          `ancbench`: engine, simulator, analysis (ESM; dependencies stay imports)
 *   lib/cli.js                            `ancbench/cli` and the `ancbench` binary (Node)
 *   lib/web/index.js                      `ancbench/web`: the controller node, self-contained except for
 *                                         standardized-audio-context, imported on demand for its contexts
 *   lib/web/ancbench-live-processor.js    the AudioWorklet processor: one self-contained script, no
 *                                         exports (standardized-audio-context's loader rejects modules
 *                                         that export)
 *   lib/types/                            declarations (tsc, tsconfig.lib.json)
 *
 * The web entry must leave `new URL('./ancbench-live-processor.js', import.meta.url)` in its output
 * as a literal, so the user's bundler copies the worklet and a plain static folder finds it beside
 * index.js. Vite would rewrite that literal while building this library, so the source names the
 * file through a constant and `workletUrlLiteral` writes the literal into the finished chunk.
 */
import { resolve } from 'node:path';
import type { InlineConfig, Plugin } from 'vite';
import pkg from './package.json' with { type: 'json' };

const root = import.meta.dirname;
const deps = Object.keys(pkg.dependencies);
const isDependency = (id: string): boolean => deps.some((d) => id === d || id.startsWith(`${d}/`)) || id.startsWith('node:');

export const WORKLET_FILE = 'ancbench-live-processor.js';

/** Replace `new URL(LIVE_WORKLET_FILE, import.meta.url)` with the literal bundlers follow. */
export function workletUrlLiteral(): Plugin {
  return {
    name: 'ancbench-worklet-url-literal',
    renderChunk(code) {
      const pattern = /new URL\(LIVE_WORKLET_FILE, import\.meta\.url\)/g;
      if (!pattern.test(code)) throw new Error('library build: the worklet URL expression was not found in the web entry');
      return { code: code.replace(pattern, `new URL('./${WORKLET_FILE}', import.meta.url)`), map: null };
    },
  };
}

/**
 * The CLI reads its version from the package.json two folders above src/cli/common.ts; the built
 * lib/cli.js (and its shared chunk) sits one folder below it.
 */
function packageJsonFromLib(): Plugin {
  return {
    name: 'ancbench-package-json-from-lib',
    renderChunk(code) {
      if (!code.includes("'../../package.json'") && !code.includes('"../../package.json"')) return null;
      return { code: code.replace(/(['"])\.\.\/\.\.\/package\.json\1/g, '$1../package.json$1'), map: null };
    },
  };
}

const common: InlineConfig = { configFile: false, root, logLevel: 'warn', publicDir: false };

/** One build per output; scripts/build-lib.mjs runs them in order. */
export const libBuilds: InlineConfig[] = [
  {
    ...common,
    build: {
      outDir: resolve(root, 'lib/web'),
      emptyOutDir: true,
      target: 'es2022',
      // the audio thread's script: minified (nobody reads it in a package; it is half the size)
      minify: true,
      lib: { entry: resolve(root, 'worklets/live-processor.ts'), formats: ['iife'], name: 'ancbenchLiveProcessor', fileName: () => WORKLET_FILE },
    },
  },
  {
    ...common,
    plugins: [workletUrlLiteral()],
    build: {
      outDir: resolve(root, 'lib/web'),
      emptyOutDir: false,
      target: 'es2022',
      minify: false,
      lib: { entry: resolve(root, 'src/web/index.ts'), formats: ['es'], fileName: () => 'index.js' },
      rollupOptions: { external: (id) => id === 'standardized-audio-context' || id.startsWith('standardized-audio-context/') },
    },
  },
  {
    ...common,
    plugins: [packageJsonFromLib()],
    build: {
      outDir: resolve(root, 'lib'),
      emptyOutDir: false,
      target: 'node20',
      minify: false,
      ssr: true,
      lib: { entry: { index: resolve(root, 'src/index.ts'), cli: resolve(root, 'src/cli/main.ts') }, formats: ['es'], fileName: (_f, name) => `${name}.js` },
      rollupOptions: { external: isDependency, output: { chunkFileNames: 'shared-[hash].js' } },
    },
  },
];
