import { defineConfig, type Plugin } from 'vite';
import { VitePWA } from 'vite-plugin-pwa';

/**
 * The app's security policy, one home for every place it is served from (DEVELOPERS.md, "Hosting"):
 * the preview server's headers, a `_headers` file in the build for static hosts, and the page's
 * meta tag (which cannot carry frame-ancestors, W3C CSP Level 3 §6.4.2, hence the headers).
 * Served on every response, so workers and the service worker (governed by the policy delivered
 * with their own script, CSP Level 3 §4.2) get the same one. Sources: REFERENCES.md §82.
 */
const CSP_DIRECTIVES = [
  "default-src 'self'",
  "script-src 'self'",
  "style-src 'self' 'unsafe-inline'",
  "img-src 'self' data: blob:",
  "media-src 'self' blob:",
  "worker-src 'self' blob:",
  "connect-src 'self' blob: data:",
  "object-src 'none'",
  "base-uri 'none'",
  "form-action 'none'",
];
/** No page may frame the app (clickjacking); header only. */
const FRAME_ANCESTORS = "frame-ancestors 'none'";
export const SECURITY_HEADERS: Record<string, string> = {
  'Content-Security-Policy': [...CSP_DIRECTIVES, FRAME_ANCESTORS].join('; '),
  'X-Content-Type-Options': 'nosniff',
  'Referrer-Policy': 'no-referrer',
  // For browsers older than CSP frame-ancestors (RFC 7034).
  'X-Frame-Options': 'DENY',
};

/** Puts the policy into index.html as a meta tag and writes `_headers` (Netlify / Cloudflare Pages format) into the build. */
function securityPolicy(): Plugin {
  return {
    name: 'humgauge-security-policy',
    transformIndexHtml: () => [{ tag: 'meta', attrs: { 'http-equiv': 'Content-Security-Policy', content: CSP_DIRECTIVES.join('; ') }, injectTo: 'head-prepend' }],
    generateBundle() {
      const lines = ['/*', ...Object.entries(SECURITY_HEADERS).map(([k, v]) => `  ${k}: ${v}`), ''];
      this.emitFile({ type: 'asset', fileName: '_headers', source: lines.join('\n') });
    },
  };
}

// The browser app. Root is web/; public/ (icons, demo recording) is copied as is.
export default defineConfig({
  root: 'web',
  publicDir: '../public',
  base: './',
  build: { outDir: '../dist', emptyOutDir: true, target: 'es2022' },
  worker: { format: 'es' },
  preview: { headers: SECURITY_HEADERS },
  plugins: [
    securityPolicy(),
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
