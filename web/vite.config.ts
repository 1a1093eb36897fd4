import { defineConfig, type Plugin } from 'vite';
import { createHash } from 'node:crypto';
import { existsSync, readFileSync } from 'node:fs';
import { relative, resolve } from 'node:path';
import { fileURLToPath } from 'node:url';

const root = fileURLToPath(new URL('.', import.meta.url));
const repo = resolve(root, '..');

/**
 * Writes build-inputs.json next to the built files: every project file the bundle was made from
 * (and this config and the lock file), with its SHA-256. `npm run tideline -- serve` rebuilds the
 * dashboard when one of them has changed (server/web-dashboard.ts), and only ever rebuilds a folder
 * that holds this file or nothing at all.
 */
function buildInputs(): Plugin {
  return {
    name: 'tideline-build-inputs',
    apply: 'build',
    generateBundle() {
      const files = new Set<string>([fileURLToPath(import.meta.url), resolve(repo, 'package-lock.json'), resolve(root, 'index.html'), resolve(root, 'bench.html')]);
      for (const id of this.getModuleIds()) {
        const path = id.split('?')[0]!;
        if (path.startsWith(repo) && !path.includes('/node_modules/') && existsSync(path)) files.add(path);
      }
      const hashes: Record<string, string> = {};
      for (const f of [...files].sort()) if (existsSync(f)) hashes[relative(repo, f)] = createHash('sha256').update(readFileSync(f)).digest('hex');
      this.emitFile({ type: 'asset', fileName: 'build-inputs.json', source: `${JSON.stringify({ format: 'tideline-dashboard-inputs/1', files: hashes }, null, 1)}\n` });
    },
  };
}

// The dashboard: preact via the automatic JSX runtime (no React plugin), built into web/dist,
// which the server serves next to the API. bench.html is the chart frame-rate page of the bench.
export default defineConfig({
  root,
  base: './',
  oxc: { jsx: { runtime: 'automatic', importSource: 'preact' } },
  plugins: [buildInputs()],
  build: {
    outDir: 'dist',
    emptyOutDir: true,
    target: 'es2022',
    rollupOptions: { input: { index: `${root}index.html`, bench: `${root}bench.html` } },
  },
  server: { proxy: { '/api': 'http://127.0.0.1:8470', '/live': { target: 'ws://127.0.0.1:8470', ws: true } } },
});
