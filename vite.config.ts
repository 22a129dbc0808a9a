/**
 * The demo page: `npm start` serves demo/ with vite; `npm run build` writes static files to dist/.
 *
 * Headers: SharedArrayBuffer (the meter ring between the audio thread and the page) needs a
 * cross-origin isolated page, i.e. the responses must carry
 *   Cross-Origin-Opener-Policy: same-origin
 *   Cross-Origin-Embedder-Policy: require-corp
 * vite's dev and preview servers send them; a static host must send them too (without them the page
 * still works, with posted meter messages instead of the ring).
 *
 * Content-Security-Policy: only the page's own files; `blob:` scripts for the worklet loader of
 * standardized-audio-context (it wraps each worklet module into a blob URL); `connect-src 'self'`
 * (no network use beyond the page's files; in dev also vite's own HMR socket). The built page carries
 * the policy in a <meta> tag so that it holds on any static host; the servers send it as a header.
 *
 * Worklets: imported as `./x-processor.ts?worker&url` (bundled per file), worker.format 'iife' so a
 * bundle ends without `export` (standardized-audio-context's loader rejects modules that export).
 */
import { defineConfig, type Plugin } from 'vite';

const isolation = {
  'Cross-Origin-Opener-Policy': 'same-origin',
  'Cross-Origin-Embedder-Policy': 'require-corp',
  'Cross-Origin-Resource-Policy': 'same-origin',
};

/** The page's policy; `dev` adds the websocket vite's client uses for reloads. */
export function contentSecurityPolicy(dev: boolean): string {
  return [
    "default-src 'self'",
    // 'wasm-unsafe-eval' lets WebAssembly compile (the FxLMS SIMD kernels); it allows no JavaScript eval
    "script-src 'self' blob: 'wasm-unsafe-eval'",
    "worker-src 'self'",
    "style-src 'self'",
    "img-src 'self' data:",
    "font-src 'self'",
    dev ? "connect-src 'self' ws: wss:" : "connect-src 'self'",
    "media-src 'self' blob: mediastream:",
    "object-src 'none'",
    "base-uri 'none'",
    "form-action 'none'",
  ].join('; ');
}

/** Puts the production policy into the built index.html as a <meta> tag. */
function cspMeta(): Plugin {
  return {
    name: 'ancbench-csp-meta',
    apply: 'build',
    transformIndexHtml(html) {
      // right after the charset declaration, before anything the policy governs
      return html.replace(/(<meta charset="utf-8" \/>)/, `$1\n    <meta http-equiv="Content-Security-Policy" content="${contentSecurityPolicy(false)}" />`);
    },
  };
}

export default defineConfig({
  root: 'demo',
  base: './',
  publicDir: false,
  plugins: [cspMeta()],
  server: {
    headers: { ...isolation, 'Content-Security-Policy': contentSecurityPolicy(true) },
  },
  preview: {
    headers: { ...isolation, 'Content-Security-Policy': contentSecurityPolicy(false) },
  },
  worker: {
    format: 'iife',
  },
  build: {
    outDir: '../dist',
    emptyOutDir: true,
    target: 'es2022',
    // keep the worklet bundles as files: a data: URL would need a looser policy
    assetsInlineLimit: 0,
  },
});
