import './styles.css';
import type { AppContext, MountScreen, NoticeKind, ScreenName } from './app-context';
import { mountListenScreen } from './views/listen-screen';
import { mountSessionsScreen } from './views/sessions-screen';
import { mountDuctScreen } from './views/duct-screen';
import { mountSettingsScreen } from './views/settings-screen';
import { mountCautionsScreen, showFirstRunNotice } from './views/cautions-screen';
import { registerSW } from 'virtual:pwa-register';
import { applyTheme } from './views/settings-screen';
import { loadSettings } from './settings';
import { el } from './views/dom';

applyTheme(loadSettings().theme);

// The app shell: one section per screen, switched by the URL hash (#listen, #sessions/<id>, ...).
const SCREENS: { name: ScreenName; label: string; mount: MountScreen }[] = [
  { name: 'listen', label: 'Listen', mount: mountListenScreen },
  { name: 'sessions', label: 'Sessions', mount: mountSessionsScreen },
  { name: 'duct', label: 'Duct', mount: mountDuctScreen },
  { name: 'settings', label: 'Settings', mount: mountSettingsScreen },
  { name: 'cautions', label: 'Cautions', mount: mountCautionsScreen },
];

const main = document.getElementById('main') as HTMLElement;
const nav = document.getElementById('nav') as HTMLElement;
const status = document.getElementById('status') as HTMLElement;
const showListeners = new Map<ScreenName, Set<(param: string | undefined) => void>>();
const sections = new Map<ScreenName, HTMLElement>();
const navButtons = new Map<ScreenName, HTMLAnchorElement>();

function parseHash(): { screen: ScreenName; param: string | undefined } {
  const [name, ...rest] = location.hash.replace(/^#/, '').split('/');
  const known = SCREENS.find((s) => s.name === name);
  return { screen: known ? known.name : 'listen', param: rest.length ? decodeURIComponent(rest.join('/')) : undefined };
}

let shownHash = '';

function show(): void {
  const { screen, param } = parseHash();
  // A new screen (or another session) starts at its top, not where the previous one was scrolled.
  if (location.hash !== shownHash) window.scrollTo(0, 0);
  shownHash = location.hash;
  for (const [name, el] of sections) el.hidden = name !== screen;
  for (const [name, a] of navButtons) {
    if (name === screen) a.setAttribute('aria-current', 'page');
    else a.removeAttribute('aria-current');
  }
  for (const fn of showListeners.get(screen) ?? []) fn(param);
}

const app: AppContext = {
  navigate(screen, param) {
    const hash = `#${screen}${param ? `/${encodeURIComponent(param)}` : ''}`;
    if (location.hash === hash) show();
    else location.hash = hash;
  },
  onShow(screen, fn) {
    let set = showListeners.get(screen);
    if (!set) showListeners.set(screen, (set = new Set()));
    set.add(fn);
    return () => set.delete(fn);
  },
  notify(message: string, kind: NoticeKind = 'info') {
    status.textContent = message;
    status.dataset.kind = kind;
  },
};

for (const s of SCREENS) {
  const a = el('a', { href: `#${s.name}`, text: s.label, className: 'navlink' });
  nav.append(a);
  navButtons.set(s.name, a);
  const section = el('section', { className: `screen screen-${s.name}`, hidden: true, attrs: { 'aria-label': s.label } });
  main.append(section);
  sections.set(s.name, section);
  try {
    s.mount(section, app);
  } catch (err) {
    section.textContent = `This screen failed to start: ${err instanceof Error ? err.message : String(err)}`;
  }
}
window.addEventListener('hashchange', show);
show();
// The first-run cautions head the Listen screen (where listening starts), until acknowledged.
showFirstRunNotice(app, sections.get('listen') ?? main);
offerUpdates();

/**
 * Service worker: the app is precached and works offline. A new version waits until the user
 * chooses to reload (a quiet banner), so a running measurement is never interrupted.
 */
function offerUpdates(): void {
  if (!('serviceWorker' in navigator)) return;
  const updateSW = registerSW({
    immediate: true,
    onNeedRefresh() {
      const reload = el('button', { type: 'button', className: 'small-button', textContent: 'Reload' });
      reload.addEventListener('click', () => void updateSW(true));
      const later = el('button', { type: 'button', className: 'small-button', textContent: 'Later' });
      const bar = el('div', { className: 'update-bar' }, el('span', { textContent: 'A new version is ready.' }), reload, later);
      bar.setAttribute('role', 'status');
      later.addEventListener('click', () => bar.remove());
      document.body.append(bar);
    },
    onOfflineReady() {
      app.notify('Ready to work offline.', 'info');
    },
    onRegisterError(err: unknown) {
      app.notify(`Offline use is not available: ${err instanceof Error ? err.message : String(err)}`, 'warn');
    },
  });
}
