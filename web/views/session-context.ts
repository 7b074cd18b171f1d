/** What the session views share: the app, navigation within the screen, and deletion with undo (stored sessions are read through storage/off-thread.ts callStore). */
import type { AppContext } from '../app-context';

export interface SessionsContext {
  app: AppContext;
  /** Shows a view of the sessions screen: undefined = list, an id, 'compare:<ids>' or 'map[:<ids>]'. */
  go(param?: string): void;
  /** Deletes a session and offers undo for a while. */
  deleteWithUndo(id: string, title: string): Promise<void>;
}

/** A rendered view; `destroy` frees its charts and listeners. */
export interface SessionView {
  destroy(): void;
}

/**
 * The title of a session for lists and headings: "site – equipment"; without either, the name
 * of the recording it was read from (without its extension); else "Unnamed session".
 */
export function sessionTitle(site: string, equipment: string, fileName?: string): string {
  const parts = [site.trim(), equipment.trim()].filter(Boolean);
  if (parts.length) return parts.join(' – ');
  const file = (fileName ?? '').trim().replace(/\.[A-Za-z0-9]{1,5}$/, '');
  return file || 'Unnamed session';
}

/** Local date and time, e.g. "2026-12-02 09:41". */
export function formatLocalStamp(ms: number): string {
  const d = new Date(ms);
  if (Number.isNaN(d.getTime())) return '—';
  const p = (n: number): string => String(n).padStart(2, '0');
  return `${d.getFullYear()}-${p(d.getMonth() + 1)}-${p(d.getDate())} ${p(d.getHours())}:${p(d.getMinutes())}`;
}
