/**
 * Builds the screens into app/renderer/dist: one self-contained bundle (plotly included, no CDN), relative asset
 * paths so the same build loads over loopback HTTP and from Electron's file:// page.
 */
import { fileURLToPath } from 'node:url';
import { defineConfig } from 'vite';
import { svelte } from '@sveltejs/vite-plugin-svelte';

const root = fileURLToPath(new URL('.', import.meta.url));

export default defineConfig({
  root,
  base: './',
  plugins: [svelte()],
  build: {
    outDir: fileURLToPath(new URL('./dist', import.meta.url)),
    emptyOutDir: true,
    chunkSizeWarningLimit: 6000, // plotly alone is ~4.6 MB minified; it is loaded from disk, never a network
    sourcemap: false,
  },
  clearScreen: false,
  logLevel: 'warn',
});
