/** What every screen of the app may use: navigation between screens and a message line. */
export type ScreenName = 'listen' | 'sessions' | 'duct' | 'settings' | 'cautions';

export type NoticeKind = 'info' | 'warn' | 'error';

export interface AppContext {
  /** Shows a screen; `param` travels in the URL hash (e.g. a session id). */
  navigate(screen: ScreenName, param?: string): void;
  /** Called each time `screen` becomes visible, with its hash parameter. Returns an unsubscribe function. */
  onShow(screen: ScreenName, fn: (param: string | undefined) => void): () => void;
  /** A short message in the app's status line (screen readers hear it too). */
  notify(message: string, kind?: NoticeKind): void;
}

/** Each screen module exports one of these; it builds its DOM inside `root` once at start-up. */
export type MountScreen = (root: HTMLElement, app: AppContext) => void;
