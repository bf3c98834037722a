import { defineConfig } from 'vite';

// The preload runs sandboxed, where only `require('electron')` works: bundle it into one CJS file.
export default defineConfig({
  build: {
    outDir: 'out/preload',
    emptyOutDir: true,
    target: 'node20',
    minify: false,
    lib: { entry: 'app/preload/index.ts', formats: ['cjs'], fileName: () => 'index.cjs' },
    rollupOptions: { external: ['electron'] },
  },
});
