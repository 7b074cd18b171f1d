/**
 * The Sessions screen: the stored sessions (newest first, searchable), storage use, import, and
 * the ways into a session's detail, the comparison of several sessions and the stability map.
 * On start it completes any recording that a closed tab or a crash left unfinished.
 */
import type { MountScreen } from '../app-context';
import { formatHz, formatRate, formatSeconds } from '../format';
import type { SessionRecord } from '../storage/db';
import { bundleOptions } from '../settings';
import { shareOrDownload } from '../storage/export';
import { ImportError } from '../storage/import';
import { callStore, importBundleFile, recoverInterruptedOffThread } from '../storage/off-thread';
import { getSessionDb, onDatabaseBlocked, onDatabaseVersionChange, requestPersistentStorage, storageFigures, type DeletedSession } from '../storage/sessions';
import { renderCompare } from './session-compare';
import type { SessionsContext, SessionView } from './session-context';
import { formatLocalStamp, sessionTitle } from './session-context';
import { renderDetail } from './session-detail';
import { formatBytes, h } from './session-dom';
import { renderMap } from './session-map';
import './sessions.css';

/** How long a deleted session can be brought back, ms. */
const UNDO_MS = 20_000;
/** Track frames a second assumed for the hour estimate when no session is stored yet. */
const DEFAULT_FRAMES_PER_S = 100;
const DEFAULT_RATE_HZ = 48_000;

function dateInputToMs(value: string, endOfDay: boolean): number | undefined {
  if (!/^\d{4}-\d{2}-\d{2}$/.test(value)) return undefined;
  const [y, m, d] = value.split('-').map(Number);
  return endOfDay ? new Date(y, m - 1, d, 23, 59, 59, 999).getTime() : new Date(y, m - 1, d).getTime();
}

export const mountSessionsScreen: MountScreen = (root, app) => {
  root.classList.add('sessions');
  const viewHost = h('div', { className: 'sessions-view' });
  const undoBar = h('div', { className: 'undo-bar', attrs: { role: 'status', 'aria-live': 'polite' } });
  undoBar.hidden = true;
  root.append(undoBar, viewHost);

  let current: SessionView | null = null;
  let renderToken = 0;
  let undoTimer: ReturnType<typeof setTimeout> | null = null;

  onDatabaseVersionChange(() => app.notify('A newer version of humgauge was opened in another tab and needs the session store: reload this tab to keep working with sessions.', 'warn'));
  onDatabaseBlocked(() => app.notify('Another humgauge tab is holding an older session store open. Close or reload that tab; sessions open here as soon as it lets go.', 'warn'));

  const ctx: SessionsContext = {
    app,
    go: (param) => app.navigate('sessions', param),
    async deleteWithUndo(id, title) {
      let deleted: DeletedSession | undefined;
      try {
        deleted = await callStore('delete', id);
      } catch (err) {
        app.notify(`The session could not be deleted: ${err instanceof Error ? err.message : String(err)}`, 'error');
        return;
      }
      if (!deleted) return;
      const kept = deleted;
      if (undoTimer !== null) clearTimeout(undoTimer);
      const undo = h('button', {
        className: 'small-button',
        text: 'Undo',
        on: {
          click: async () => {
            undoBar.hidden = true;
            try {
              await callStore('restore', kept);
              app.notify(`Restored “${title}”.`, 'info');
              ctx.go(id);
            } catch (err) {
              app.notify(`The session could not be restored: ${err instanceof Error ? err.message : String(err)}`, 'error');
            }
          },
        },
      });
      undoBar.replaceChildren(h('span', { text: `Deleted “${title}”.` }), undo);
      undoBar.hidden = false;
      undoTimer = setTimeout(() => {
        undoBar.hidden = true;
        undoBar.replaceChildren();
      }, UNDO_MS);
      ctx.go();
    },
  };

  async function show(param: string | undefined): Promise<void> {
    const token = ++renderToken;
    current?.destroy();
    current = null;
    viewHost.replaceChildren(h('p', { className: 'hint', text: 'Loading sessions…' }));
    let view: SessionView;
    try {
      if (param && param.startsWith('compare:')) view = await renderCompare(viewHost, param.slice(8).split(',').filter(Boolean));
      else if (param === 'map' || (param && param.startsWith('map:'))) view = await renderMap(viewHost, ctx, param.length > 4 ? param.slice(4).split(',').filter(Boolean) : null);
      else if (param) view = await renderDetail(viewHost, ctx, param);
      else view = await renderList(viewHost, ctx);
    } catch (err) {
      viewHost.replaceChildren(h('p', { className: 'alert', text: `The sessions could not be shown: ${err instanceof Error ? err.message : String(err)}` }));
      return;
    }
    if (token !== renderToken) view.destroy();
    else current = view;
  }

  app.onShow('sessions', (param) => void show(param));

  // Recording left unfinished by a closed tab or a crash: complete it now, from what was stored.
  void (async () => {
    try {
      // Opened here first, so an upgrade of the store happens before the storage worker opens it.
      await getSessionDb();
      const done = await recoverInterruptedOffThread();
      if (done.length) {
        app.notify(`${done.length === 1 ? 'A recording was' : `${done.length} recordings were`} interrupted (tab closed or crashed); completed from what was stored. See Sessions.`, 'warn');
        if (!root.hidden && !location.hash.includes('/')) void show(undefined);
      }
    } catch (err) {
      app.notify(`The session store could not be opened: ${err instanceof Error ? err.message : String(err)}`, 'error');
    }
  })();
};

async function renderList(host: HTMLElement, ctx: SessionsContext): Promise<SessionView> {
  const search = h('input', { attrs: { type: 'search', id: 'session-search', placeholder: 'site, equipment or notes', autocomplete: 'off' } });
  const from = h('input', { attrs: { type: 'date', id: 'session-from' } });
  const to = h('input', { attrs: { type: 'date', id: 'session-to' } });
  const list = h('ul', { className: 'session-list', attrs: { 'aria-label': 'Stored sessions' } });
  const count = h('p', { className: 'hint', attrs: { 'aria-live': 'polite' } });
  const storage = h('div', { className: 'storage-panel' });
  const selected = new Set<string>();
  const compareBtn = h('button', { className: 'small-button', text: 'Compare selected', attrs: { type: 'button', id: 'compare-selected' } });
  const mapBtn = h('button', { className: 'small-button', text: 'Stability map', attrs: { type: 'button', id: 'stability-map' } });
  const exportBtn = h('button', { className: 'small-button', text: 'Export selected', attrs: { type: 'button', id: 'export-selected' } });
  const importInput = h('input', { attrs: { type: 'file', accept: '.zip,application/zip,.wav,audio/wav,audio/x-wav', id: 'import-file' }, className: 'visually-hidden' });
  const importLabel = h('label', { className: 'small-button file-button', attrs: { for: 'import-file' } }, 'Import bundle…');
  const importMsg = h('p', { className: 'hint', attrs: { 'aria-live': 'polite' } });

  const updateButtons = (): void => {
    compareBtn.disabled = selected.size < 2;
    exportBtn.disabled = selected.size < 1;
    compareBtn.textContent = `Compare selected (${selected.size})`;
    exportBtn.textContent = `Export selected (${selected.size})`;
  };

  let sessions: SessionRecord[] = [];
  const refresh = async (): Promise<void> => {
    sessions = await callStore('list', { text: search.value, fromMs: dateInputToMs(from.value, false), toMs: dateInputToMs(to.value, true) });
    list.replaceChildren(...sessions.map((s) => listItem(s)));
    for (const id of [...selected]) if (!sessions.some((s) => s.id === id)) selected.delete(id);
    count.textContent = sessions.length ? `${sessions.length} session${sessions.length === 1 ? '' : 's'}, newest first.` : search.value || from.value || to.value ? 'No session matches.' : 'No sessions yet. Recordings made on the Listen screen appear here.';
    updateButtons();
    void showStorage();
  };

  const listItem = (s: SessionRecord): HTMLElement => {
    const sum = s.report?.summary;
    const box = h('input', { attrs: { type: 'checkbox', 'aria-label': `Select ${sessionTitle(s.meta.site, s.meta.equipment, s.meta.fileName)}` } });
    box.checked = selected.has(s.id);
    box.addEventListener('change', () => {
      if (box.checked) selected.add(s.id);
      else selected.delete(s.id);
      updateButtons();
    });
    const badge = s.status === 'complete' ? null : h('span', { className: `badge badge-${s.status}`, text: s.status });
    return h(
      'li',
      { className: 'session-item', attrs: { 'data-id': s.id } },
      h('label', { className: 'select-box' }, box),
      h(
        'div',
        { className: 'session-main' },
        h('a', { className: 'session-link', text: sessionTitle(s.meta.site, s.meta.equipment, s.meta.fileName), attrs: { href: `#sessions/${encodeURIComponent(s.id)}` } }),
        badge,
        h('div', { className: 'session-facts', text: `${formatLocalStamp(s.createdAtMs)} · ${formatSeconds(s.durationS)}${s.audio.sampleCount > 0 ? ' · audio' : ''}` }),
        h('div', { className: 'session-facts', text: sum ? `${formatHz(sum.frequencyHz)} · growth ${formatRate(sum.growthRatePerS, sum.growthRateCi95PerS, 'none')} · decay ${formatRate(sum.decayRatePerS, sum.decayRateCi95PerS, 'none')}` : 'no report' }),
      ),
    );
  };

  const showStorage = async (): Promise<void> => {
    const withFrames = sessions.filter((s) => s.durationS > 0 && s.frameCount > 0);
    const framesPerS = withFrames.length ? withFrames.reduce((a, s) => a + s.frameCount / s.durationS, 0) / withFrames.length : DEFAULT_FRAMES_PER_S;
    const rateHz = sessions[0]?.meta.sampleRateHz ?? DEFAULT_RATE_HZ;
    const f = await storageFigures(framesPerS, rateHz);
    const left = f.usedBytes !== null && f.quotaBytes !== null ? f.quotaBytes - f.usedBytes : null;
    const persistBtn = f.isPersisted
      ? null
      : h('button', {
          className: 'small-button',
          text: 'Ask to keep sessions',
          attrs: { type: 'button' },
          on: {
            click: async () => {
              const ok = await requestPersistentStorage();
              ctx.app.notify(ok ? 'The browser will keep the session store when space runs low.' : 'The browser did not agree to keep the session store; export sessions you need.', ok ? 'info' : 'warn');
              void showStorage();
            },
          },
        });
    storage.replaceChildren(
      h('h3', { className: 'section-title', text: 'Storage on this device' }),
      h('p', { text: `Used ${formatBytes(f.usedBytes)}; left ${formatBytes(left)}. ${f.isPersisted === true ? 'Kept by the browser when space runs low.' : f.isPersisted === false ? 'The browser may clear it when space runs low.' : ''}` }),
      h('p', { text: `An hour of recording costs about ${formatBytes(f.hourTrackOnlyBytes)} with the track only, or ${formatBytes(f.hourWithAudioBytes)} with the raw audio (${Math.round(framesPerS)} frames/s, ${rateHz} Hz).` }),
      ...(persistBtn ? [persistBtn] : []),
    );
  };

  let debounce: ReturnType<typeof setTimeout> | null = null;
  const onFilter = (): void => {
    if (debounce !== null) clearTimeout(debounce);
    debounce = setTimeout(() => void refresh(), 150);
  };
  search.addEventListener('input', onFilter);
  from.addEventListener('change', onFilter);
  to.addEventListener('change', onFilter);
  compareBtn.addEventListener('click', () => ctx.go(`compare:${[...selected].join(',')}`));
  mapBtn.addEventListener('click', () => ctx.go(selected.size >= 1 ? `map:${[...selected].join(',')}` : 'map'));
  exportBtn.addEventListener('click', async () => {
    if (selected.size === 0) return;
    try {
      const { bytes, sessionCount } = await callStore('bundle', [...selected], Date.now(), bundleOptions());
      const stamp = new Date().toISOString().slice(0, 10);
      const how = await shareOrDownload(bytes, `humgauge-${sessionCount}-sessions-${stamp}.zip`, 'application/zip');
      if (how !== 'cancelled') ctx.app.notify(`Exported ${sessionCount} session${sessionCount === 1 ? '' : 's'} (${formatBytes(bytes.length)}).`, 'info');
    } catch (err) {
      ctx.app.notify(`Export failed: ${err instanceof Error ? err.message : String(err)}`, 'error');
    }
  });
  importInput.addEventListener('change', async () => {
    const file = importInput.files?.[0];
    importInput.value = '';
    if (!file) return;
    if (/\.wav$/i.test(file.name) || file.type.startsWith('audio/')) {
      importMsg.replaceChildren(
        `${file.name} is a recording: recordings are analysed on the Listen screen (Open recording), and the result is stored here as a session. `,
        h('a', { text: 'Go to Listen', attrs: { href: '#listen' } }),
      );
      return;
    }
    importMsg.textContent = `Reading ${file.name}…`;
    try {
      const result = await importBundleFile(file);
      const parts = [];
      if (result.imported.length) parts.push(`imported ${result.imported.length} session${result.imported.length === 1 ? '' : 's'}`);
      if (result.alreadyPresent.length) parts.push(`${result.alreadyPresent.length} already stored (left unchanged)`);
      importMsg.textContent = `${file.name}: ${parts.join('; ')}.`;
      ctx.app.notify(importMsg.textContent, 'info');
      await refresh();
    } catch (err) {
      const why = err instanceof ImportError ? err.message : `unexpected problem: ${err instanceof Error ? err.message : String(err)}`;
      importMsg.textContent = `${file.name} was not imported; nothing was changed. ${why}`;
      ctx.app.notify(importMsg.textContent, 'error');
    }
  });

  host.replaceChildren(
    h('h2', { text: 'Sessions' }),
    h(
      'form',
      { className: 'session-filter', attrs: { role: 'search' }, on: { submit: (e) => e.preventDefault() } },
      h('div', { className: 'field' }, h('label', { text: 'Search', attrs: { for: 'session-search' } }), search),
      h('div', { className: 'field-row' }, h('div', { className: 'field' }, h('label', { text: 'From date', attrs: { for: 'session-from' } }), from), h('div', { className: 'field' }, h('label', { text: 'To date', attrs: { for: 'session-to' } }), to)),
    ),
    h('div', { className: 'controls session-actions' }, compareBtn, mapBtn, exportBtn, importLabel, importInput),
    importMsg,
    count,
    list,
    storage,
  );
  await refresh();
  return {
    destroy: () => {
      if (debounce !== null) clearTimeout(debounce);
    },
  };
}
