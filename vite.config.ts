import { defineConfig } from 'vite';
import { VitePWA } from 'vite-plugin-pwa';

// The browser app. Root is web/; public/ (icons, demo recording) is copied as is.
export default defineConfig({
  root: 'web',
  publicDir: '../public',
  base: './',
  build: { outDir: '../dist', emptyOutDir: true, target: 'es2022' },
  worker: { format: 'es' },
  plugins: [
    VitePWA({
      registerType: 'prompt',
      injectRegister: false,
      manifest: {
        name: 'humgauge',
        short_name: 'humgauge',
        description: 'Listen to a humming duct or heater: onset, frequency, growth and decay rates.',
        display: 'standalone',
        start_url: '.',
        theme_color: '#0b3a4a',
        background_color: '#ffffff',
        icons: [
          { src: 'icons/icon-192.png', sizes: '192x192', type: 'image/png' },
          { src: 'icons/icon-512.png', sizes: '512x512', type: 'image/png' },
          { src: 'icons/icon-maskable-512.png', sizes: '512x512', type: 'image/png', purpose: 'maskable' },
        ],
      },
      workbox: {
        globPatterns: ['**/*.{js,css,html,svg}'],
        cleanupOutdatedCaches: true,
        clientsClaim: true,
      },
    }),
  ],
});
