/**
 * The one DOM helper of the screens, and small local-storage helpers. Text only ever goes in
 * through textContent, properties or attribute setters, never through innerHTML, so user text
 * cannot become markup.
 */

/** A child of an element; null, undefined and false are skipped (handy for optional parts). */
export type Child = Node | string | null | undefined | false;

/** Extra keys of `el`: `text` (textContent), `attrs` (setAttribute), `on` (listeners). */
export interface ElExtras {
  text?: string;
  attrs?: Record<string, string>;
  on?: { [K in keyof HTMLElementEventMap]?: (ev: HTMLElementEventMap[K]) => void };
}

export type ElProps<K extends keyof HTMLElementTagNameMap> = Partial<Omit<HTMLElementTagNameMap[K], keyof ElExtras>> & ElExtras;

/** Creates an element, assigns its properties, attributes and listeners, and appends children. */
export function el<K extends keyof HTMLElementTagNameMap>(tag: K, props: ElProps<K> = {}, ...children: Child[]): HTMLElementTagNameMap[K] {
  const e = document.createElement(tag);
  const { text, attrs, on, ...rest } = props;
  Object.assign(e, rest);
  if (text !== undefined) e.textContent = text;
  for (const [k, v] of Object.entries(attrs ?? {})) e.setAttribute(k, v);
  for (const [type, fn] of Object.entries(on ?? {})) e.addEventListener(type, fn as EventListener);
  for (const c of children) if (c !== null && c !== undefined && c !== false) e.append(c);
  return e;
}

/** Reads a JSON object from localStorage over `fallback`; damaged or missing storage gives the fallback. */
export function loadJson<T extends object>(key: string, fallback: T): T {
  try {
    const raw = localStorage.getItem(key);
    if (!raw) return { ...fallback };
    const parsed = JSON.parse(raw) as Partial<T>;
    return { ...fallback, ...parsed };
  } catch {
    return { ...fallback };
  }
}

/** Writes a JSON object to localStorage; a full or blocked store only loses the memory, the screen still works. */
export function saveJson(key: string, value: object): void {
  try {
    localStorage.setItem(key, JSON.stringify(value));
  } catch {
    /* storage full or blocked */
  }
}
