// The source reader beside the answer: a cited passage in its surrounding text, a closest passage of an
// abstention, and the original file.

import { apiJson, Cancelled, documentPath } from './api.js';
import { $, el } from './dom.js';
import type { DeskState } from './state.js';
import { sectionLabel } from './ticket.js';
import type { Citation, OriginalLink, Passage, SourceSummary } from './types.js';

export interface Reader {
  openCitation(c: Citation, from: HTMLElement): Promise<void>;
  openSummary(s: SourceSummary, from: HTMLElement): void;
  close(): void;
}

interface CardMeta {
  n: string;
  title: string;
  section: string;
  page: number | null;
  pageEnd?: number | null;
  effective: string | null;
  version?: string | null | undefined;
  file: string;
}

export function createReader(state: DeskState): Reader {
  /** The button that opened the reader, to return to with "Back to the answer". */
  let openedFrom: HTMLElement | null = null;
  let readerDoc: { collection: string; documentId: string; page: number | null; format: string } | null = null;

  function close(): void {
    $('reader-card').hidden = true;
    $('reader-empty').hidden = false;
    readerDoc = null;
  }

  function showCard(meta: CardMeta): void {
    $('reader-empty').hidden = true;
    $('reader-card').hidden = false;
    $('reader-number').textContent = meta.n;
    $('reader-title').textContent = meta.title;
    $('reader-section').textContent = sectionLabel(meta.title, meta.section) || '—';
    const page = meta.page === null ? '—' : meta.pageEnd && meta.pageEnd !== meta.page ? `${meta.page}–${meta.pageEnd}` : String(meta.page);
    $('reader-page').textContent = page;
    // The document's own statement of when it applies, and of which version it is, when it gives one.
    $('reader-effective').textContent = (meta.effective ?? 'not stated') + (meta.version ? ` (version ${meta.version})` : '');
    $('reader-file').textContent = meta.file;
    $('reader-status').textContent = '';
    const open = $<HTMLButtonElement>('open-original');
    open.textContent = meta.page !== null && /\.pdf$/i.test(meta.file) ? `Open the original file at page ${meta.page}` : 'Open the original file';
  }

  function focusReader(from: HTMLElement): void {
    openedFrom = from;
    $('reader-title').focus();
  }

  async function openCitation(c: Citation, from: HTMLElement): Promise<void> {
    if (!state.shown) return;
    const col = state.shown.collection;
    readerDoc = { collection: col, documentId: c.documentId, page: c.page, format: /\.pdf$/i.test(c.source) ? 'pdf' : 'other' };
    showCard({ n: `Source ${c.n}`, title: c.title, section: c.section, page: c.page, effective: c.effectiveDate, version: c.version, file: c.source });
    const box = $('reader-passage');
    // The quote alone first, so the reader is never empty while the context loads.
    box.replaceChildren(el('p', {}, el('mark', {}, c.quote)));
    focusReader(from);
    try {
      const p = await apiJson<Passage>(`${documentPath(col, c.documentId)}/passage?start=${c.start}&end=${c.end}`);
      if (readerDoc?.documentId !== c.documentId) return;
      box.replaceChildren(el('p', { class: 'passage-text' }, p.before.trimStart(), el('mark', {}, p.quote), p.after.trimEnd()));
      if (c.page === null && p.page !== null) $('reader-page').textContent = String(p.page);
      box.querySelector('mark')?.scrollIntoView({ block: 'nearest' });
    } catch (err) {
      if (!(err instanceof Cancelled)) $('reader-status').textContent = `Only the quote is shown: the surrounding text could not be loaded (${(err as Error).message}).`;
    }
  }

  function openSummary(s: SourceSummary, from: HTMLElement): void {
    if (!state.shown) return;
    readerDoc = { collection: state.shown.collection, documentId: s.documentId, page: s.page, format: /\.pdf$/i.test(s.source) ? 'pdf' : 'other' };
    showCard({ n: `Closest passage ${s.n}`, title: s.title, section: s.section, page: s.page, pageEnd: s.pageEnd, effective: s.effectiveDate, version: s.version, file: s.source });
    $('reader-passage').replaceChildren(el('p', { class: 'passage-text' }, s.text));
    focusReader(from);
  }

  /**
   * Originals open through a signed link that lives 60 s: a plain navigation cannot carry the key,
   * and a link (unlike a blob of the file) lets the browser's PDF viewer honour #page=N.
   */
  async function openOriginal(): Promise<void> {
    const doc = readerDoc;
    if (!doc) return;
    // Opened now, while the click still counts as the user's, then pointed at the file.
    const win = window.open('about:blank', '_blank');
    try {
      const link = await apiJson<OriginalLink>(`${documentPath(doc.collection, doc.documentId)}/original-link`, { method: 'POST' });
      const url = link.path + (doc.format === 'pdf' && doc.page !== null ? `#page=${doc.page}` : '');
      if (win) {
        win.opener = null;
        win.location.href = url;
      } else {
        $('reader-status').replaceChildren('Pop-ups are blocked; ', el('a', { href: url, target: '_blank', rel: 'noopener' }, 'open the original file here'), '.');
      }
    } catch (err) {
      win?.close();
      if (!(err instanceof Cancelled)) $('reader-status').textContent = `The original file cannot be opened: ${(err as Error).message}`;
    }
  }

  $('open-original').addEventListener('click', () => void openOriginal());
  $('reader-back').addEventListener('click', () => {
    (openedFrom?.isConnected ? openedFrom : $('answer-heading')).focus();
  });
  return { openCitation, openSummary, close };
}
