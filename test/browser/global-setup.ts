/**
 * Browser tests: build the page and the test harness with the project's vite config (the same
 * production build `npm run build` makes, plus the harness page), serve the result with vite's
 * preview server (which sends the COOP/COEP and CSP headers), and hand the URL to the tests.
 */
import { resolve } from 'node:path';
import { createServer as netServer } from 'node:net';
import { build, preview, type PreviewServer } from 'vite';
import type { TestProject } from 'vitest/node';

const root = resolve(import.meta.dirname, '../..');
export const BUILD_DIR = resolve(root, 'test-results/browser-dist');

declare module 'vitest' {
  export interface ProvidedContext {
    baseUrl: string;
  }
}

function freePort(): Promise<number> {
  return new Promise((res, rej) => {
    const s = netServer();
    s.once('error', rej);
    s.listen(0, '127.0.0.1', () => {
      const a = s.address();
      const port = typeof a === 'object' && a ? a.port : 0;
      s.close(() => res(port));
    });
  });
}

let server: PreviewServer | null = null;

export default async function setup(project: TestProject): Promise<() => Promise<void>> {
  const configFile = resolve(root, 'vite.config.ts');
  await build({
    configFile,
    root,
    logLevel: 'warn',
    build: {
      outDir: BUILD_DIR,
      emptyOutDir: true,
      rollupOptions: { input: { demo: resolve(root, 'demo/index.html'), harness: resolve(root, 'test/browser/harness/index.html') } },
    },
  });
  const port = await freePort();
  server = await preview({ configFile, root, logLevel: 'warn', build: { outDir: BUILD_DIR }, preview: { port, strictPort: true, host: '127.0.0.1' } });
  project.provide('baseUrl', `http://127.0.0.1:${port}`);
  return async () => {
    await new Promise<void>((res) => server!.httpServer.close(() => res()));
    server = null;
  };
}
