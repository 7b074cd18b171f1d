import { defineConfig } from 'vite';

// The command line and the bench: the pure dsp/ core plus the Node entry, bundled for Node 20
// (which cannot run TypeScript itself).
export default defineConfig({
  publicDir: false,
  build: {
    ssr: true,
    outDir: 'dist-cli',
    emptyOutDir: true,
    target: 'node20',
    minify: false,
    rollupOptions: {
      input: { humgauge: 'dsp/cli/humgauge.ts', bench: 'dsp/cli/bench.ts', 'analyze-worker': 'dsp/cli/analyze-worker.ts' },
      // Chunks beside the entries: the batch finds its worker script (analyze-worker.js) next to itself.
      output: { entryFileNames: '[name].js', chunkFileNames: '[name]-[hash].js', banner: '#!/usr/bin/env node' },
    },
  },
  ssr: { noExternal: true },
});
