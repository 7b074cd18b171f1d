/** SVG, table and formatting helpers of the session views (elements come from dom.ts). */

import { el } from './dom';

/** The screens' one element helper (dom.ts), under the short name the session views use. */
export const h = el;

const SVG_NS = 'http://www.w3.org/2000/svg';

/** Creates an SVG element with attributes (and optional text content). */
export function svg<K extends keyof SVGElementTagNameMap>(tag: K, attrs: Record<string, string | number> = {}, text?: string): SVGElementTagNameMap[K] {
  const el = document.createElementNS(SVG_NS, tag);
  for (const [k, v] of Object.entries(attrs)) el.setAttribute(k, String(v));
  if (text !== undefined) el.textContent = text;
  return el;
}

/** A table from a header row and body rows of text cells, in a box that scrolls sideways on a narrow screen. */
export function table(className: string, caption: string, head: string[], rows: string[][]): HTMLElement {
  return el(
    'div',
    { className: 'table-scroll' },
    el(
      'table',
      { className },
      el('caption', { text: caption }),
      el('thead', {}, el('tr', {}, ...head.map((c) => el('th', { text: c, attrs: { scope: 'col' } })))),
      el('tbody', {}, ...rows.map((r) => el('tr', {}, ...r.map((c) => el('td', { text: c }))))),
    ),
  );
}

/** The value of a CSS custom property of the page (theme colours), or a fallback. */
export function cssVar(name: string, fallback: string): string {
  const v = getComputedStyle(document.documentElement).getPropertyValue(name).trim();
  return v || fallback;
}

/** Bytes as "12.3 MB" (decimal units, SI). */
export function formatBytes(bytes: number | null): string {
  if (bytes === null || !Number.isFinite(bytes)) return '— (not known)';
  if (bytes < 1000) return `${bytes} B`;
  const units = ['kB', 'MB', 'GB', 'TB'];
  let v = bytes / 1000;
  let k = 0;
  while (v >= 1000 && k < units.length - 1) {
    v /= 1000;
    k++;
  }
  return `${v.toFixed(v < 10 ? 1 : 0)} ${units[k]}`;
}
