import { defineConfig } from 'vite';
import { fileURLToPath } from 'node:url';

const root = fileURLToPath(new URL('.', import.meta.url));

// The dashboard: preact via the automatic JSX runtime (no React plugin), built into web/dist,
// which the server serves next to the API. bench.html is the chart frame-rate page of the bench.
export default defineConfig({
  root,
  base: './',
  oxc: { jsx: { runtime: 'automatic', importSource: 'preact' } },
  build: {
    outDir: 'dist',
    emptyOutDir: true,
    target: 'es2022',
    rollupOptions: { input: { index: `${root}index.html`, bench: `${root}bench.html` } },
  },
  server: { proxy: { '/api': 'http://127.0.0.1:8470', '/live': { target: 'ws://127.0.0.1:8470', ws: true } } },
});
