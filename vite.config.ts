import { defineConfig } from 'vite';
import { svelte } from '@sveltejs/vite-plugin-svelte';

// The renderer is built once and served by Electron's app:// protocol or by the web shell.
export default defineConfig({
  root: 'renderer',
  base: './',
  plugins: [svelte()],
  build: { outDir: '../out/renderer', emptyOutDir: true, target: 'es2022', sourcemap: true },
});
