// The reference desk: ask a question of one collection, read the cited answer as it streams in,
// check each source passage beside it, copy the answer for a ticket, and rate it.

import { readServerEvents } from './sse.js';
import { footnote, sectionLabel, ticketText } from './ticket.js';
import type { AnswerDone, Citation, Claim, Passage, SourceSummary, Turn } from './types.js';

const KEY_STORE = 'sourcebound.key';
const COLLECTION_STORE = 'sourcebound.collection';
// The service accepts at most limits.historyMaxTurns (20 by default) earlier turns.
const MAX_TURNS = 20;

const $ = <T extends HTMLElement>(id: string): T => {
  const el = document.getElementById(id);
  if (!el) throw new Error(`missing #${id}`);
  return el as T;
};

const el = <K extends keyof HTMLElementTagNameMap>(tag: K, attrs: Record<string, string> = {}, ...children: (Node | string)[]): HTMLElementTagNameMap[K] => {
  const e = document.createElement(tag);
  for (const [k, v] of Object.entries(attrs)) {
    if (k === 'class') e.className = v;
    else e.setAttribute(k, v);
  }
  e.append(...children);
  return e;
};

class Cancelled extends Error {}

class ApiError extends Error {
  constructor(
    readonly status: number,
    readonly code: string,
    message: string,
  ) {
    super(message);
  }
}

// ---- the API key: asked for on a 401, kept in sessionStorage for this tab only ----

let keyWaiters: { resolve: () => void; reject: (e: Error) => void }[] = [];

function currentKey(): string | null {
  return sessionStorage.getItem(KEY_STORE);
}

function askForKey(message = ''): Promise<void> {
  const dialog = $<HTMLDialogElement>('key-dialog');
  $('key-error').textContent = message;
  if (!dialog.open) {
    $<HTMLInputElement>('key-input').value = '';
    dialog.showModal();
    $<HTMLInputElement>('key-input').focus();
  }
  return new Promise((resolve, reject) => keyWaiters.push({ resolve, reject }));
}

function settleKeyWaiters(ok: boolean): void {
  const waiting = keyWaiters;
  keyWaiters = [];
  for (const w of waiting) {
    if (ok) w.resolve();
    else w.reject(new Cancelled('no key given'));
  }
}

function setUpKeyDialog(): void {
  const dialog = $<HTMLDialogElement>('key-dialog');
  $<HTMLFormElement>('key-form').addEventListener('submit', (ev) => {
    ev.preventDefault();
    const key = $<HTMLInputElement>('key-input').value.trim();
    if (!key) {
      $('key-error').textContent = 'Enter the key you were given.';
      return;
    }
    sessionStorage.setItem(KEY_STORE, key);
    dialog.close();
    settleKeyWaiters(true);
  });
  $('key-cancel').addEventListener('click', () => {
    dialog.close();
    settleKeyWaiters(false);
  });
  $('key-forget').addEventListener('click', () => {
    sessionStorage.removeItem(KEY_STORE);
    $<HTMLInputElement>('key-input').value = '';
    $('key-error').textContent = 'The key is forgotten in this tab.';
  });
  dialog.addEventListener('cancel', () => settleKeyWaiters(false));
  $('key-button').addEventListener('click', () => {
    void askForKey().then(loadCollections, () => undefined);
  });
}

/** fetch() with the key; a 401 asks for a key and tries again. */
async function api(path: string, init: RequestInit = {}): Promise<Response> {
  for (let attempt = 0; ; attempt++) {
    const headers = new Headers(init.headers);
    const key = currentKey();
    if (key) headers.set('authorization', `Bearer ${key}`);
    const res = await fetch(path, { ...init, headers });
    if (res.status !== 401) return res;
    await askForKey(key || attempt > 0 ? 'That key was not accepted. Check it and try again.' : '');
  }
}

async function failure(res: Response): Promise<ApiError> {
  try {
    const body = (await res.json()) as { error?: { code?: string; message?: string } };
    return new ApiError(res.status, body.error?.code ?? 'unknown', body.error?.message ?? res.statusText);
  } catch {
    return new ApiError(res.status, 'unknown', `The service answered ${res.status} ${res.statusText}`);
  }
}

async function apiJson<T>(path: string, init: RequestInit = {}): Promise<T> {
  const res = await api(path, init);
  if (!res.ok) throw await failure(res);
  return (await res.json()) as T;
}

const postJson = (body: unknown): RequestInit => ({ method: 'POST', headers: { 'content-type': 'application/json' }, body: JSON.stringify(body) });

// ---- state ----

interface Shown {
  asked: string;
  history: Turn[];
  collection: string;
  done: AnswerDone;
  sources: SourceSummary[];
}

let history: Turn[] = [];
let shown: Shown | null = null;
let inFlight: AbortController | null = null;
let rating: boolean | null = null;
/** The button that opened the reader, to return to with "Back to the answer". */
let openedFrom: HTMLElement | null = null;
let readerDoc: { collection: string; documentId: string; page: number | null; format: string } | null = null;

const collection = (): string => $<HTMLSelectElement>('collection').value;

async function loadCollections(): Promise<void> {
  const select = $<HTMLSelectElement>('collection');
  try {
    const { collections } = await apiJson<{ collections: { name: string; documents: number }[] }>('/v1/collections');
    const wanted = sessionStorage.getItem(COLLECTION_STORE) ?? select.value;
    select.replaceChildren(...collections.map((c) => el('option', { value: c.name }, `${c.name} (${c.documents} documents)`)));
    if (collections.some((c) => c.name === wanted)) select.value = wanted;
    $('ask-status').textContent = collections.length === 0 ? 'No collections are visible to this key.' : '';
  } catch (err) {
    if (!(err instanceof Cancelled)) $('ask-status').textContent = `Could not list the collections: ${(err as Error).message}`;
  }
}

// ---- asking ----

function setBusy(busy: boolean): void {
  $('answer-live').setAttribute('aria-busy', String(busy));
  $<HTMLButtonElement>('ask-button').disabled = busy;
}

async function ask(question: string): Promise<void> {
  inFlight?.abort();
  const controller = new AbortController();
  inFlight = controller;
  const col = collection();
  const earlier = history.slice(-MAX_TURNS);
  const live = $('answer-live');
  $('answer').hidden = false;
  $('answer-tools').hidden = true;
  $('asked-as').hidden = true;
  $('answer-heading').textContent = 'Answer';
  live.replaceChildren(el('p', { class: 'pending' }, 'Looking through the documents…'));
  $('ask-status').textContent = '';
  setBusy(true);
  let sources: SourceSummary[] = [];
  let text = '';
  let paragraph: HTMLParagraphElement | null = null;
  try {
    const body = { question, collection: col, stream: true, ...(earlier.length > 0 ? { history: earlier } : {}) };
    const res = await api('/v1/answer', { ...postJson(body), signal: controller.signal });
    if (!res.ok) throw await failure(res);
    if (!res.body) throw new Error('the answer stream is empty');
    let done: AnswerDone | null = null;
    for await (const ev of readServerEvents(res.body)) {
      if (ev.event === 'sources') {
        sources = (JSON.parse(ev.data) as { sources: SourceSummary[] }).sources;
      } else if (ev.event === 'delta') {
        const d = JSON.parse(ev.data) as { text: string; reset?: boolean };
        text = d.reset ? d.text : text + d.text;
        paragraph ??= el('p', { class: 'streaming' });
        paragraph.textContent = text;
        if (!paragraph.isConnected) live.replaceChildren(paragraph);
      } else if (ev.event === 'done') {
        done = JSON.parse(ev.data) as AnswerDone;
      } else if (ev.event === 'error') {
        const e = (JSON.parse(ev.data) as { error: { code: string; message: string } }).error;
        throw new ApiError(200, e.code, e.message);
      }
    }
    if (!done) throw new Error('the answer stream ended early; ask again');
    if (controller.signal.aborted) return;
    shown = { asked: question, history: earlier, collection: col, done, sources };
    renderAnswer(shown);
    history = [...history, { role: 'user' as const, content: question }, { role: 'assistant' as const, content: done.answer }].slice(-MAX_TURNS);
    renderTurns();
  } catch (err) {
    if (controller.signal.aborted || err instanceof Cancelled) {
      if (err instanceof Cancelled) live.replaceChildren(el('p', {}, 'Not asked: the service needs an API key.'));
      return;
    }
    live.replaceChildren(el('p', { class: 'error' }, `The question could not be answered: ${(err as Error).message}`));
  } finally {
    if (inFlight === controller) {
      inFlight = null;
      setBusy(false);
    }
  }
}

function sourceButton(c: Citation): HTMLButtonElement {
  const b = el('button', { type: 'button', class: 'src', 'aria-label': `Source ${c.n}: ${c.title}${c.page !== null ? `, page ${c.page}` : ''}` }, String(c.n));
  b.addEventListener('click', () => openCitation(c, b));
  return b;
}

function renderAnswer(s: Shown): void {
  const { done } = s;
  const live = $('answer-live');
  $('caution-text').textContent = done.caution;
  const asked = $('asked-as');
  // The question stays in view beside its answer; a rewritten follow-up shows what was really asked.
  if (done.rewrittenBy || done.question.trim() !== s.asked.trim()) {
    asked.replaceChildren('Answered as the standalone question: ', el('q', {}, done.question));
  } else {
    asked.replaceChildren('Question: ', el('q', {}, s.asked));
  }
  asked.hidden = false;
  rating = null;
  for (const id of ['rate-yes', 'rate-no']) $(id).setAttribute('aria-pressed', 'false');
  $<HTMLTextAreaElement>('rating-comment').value = '';
  $('rating-status').textContent = '';
  $('copy-status').textContent = '';
  $<HTMLButtonElement>('copy-ticket').hidden = done.abstained;

  if (done.abstained) {
    $('answer-heading').textContent = 'Not in the documents';
    const parts: Node[] = [el('p', { class: 'abstained' }, done.answer)];
    if (s.sources.length > 0) {
      const list = el('ol', { class: 'closest' });
      for (const src of s.sources) {
        const b = el('button', { type: 'button', class: 'closest-open' }, src.title);
        b.addEventListener('click', () => openSummary(src, b));
        const where = [sectionLabel(src.title, src.section), src.page !== null ? `page ${src.page}` : ''].filter(Boolean).join(', ');
        list.append(el('li', {}, b, where ? el('span', { class: 'where' }, ` — ${where}`) : ''));
      }
      parts.push(el('h3', {}, 'Closest passages'), el('p', { class: 'hint' }, 'These came nearest to the question but do not answer it. Read them before telling the customer.'), list);
    } else {
      parts.push(el('p', { class: 'hint' }, 'No passage came close to the question.'));
    }
    live.replaceChildren(...parts);
  } else {
    const byN = new Map(done.citations.map((c) => [c.n, c]));
    const claims = done.claims && done.claims.length > 0 ? done.claims : [{ text: done.answer, sources: done.citations.map((c) => c.n), supported: true }];
    const list = el('ol', { class: 'claims' });
    for (const claim of claims) {
      const li = el('li', { class: claim.supported ? 'claim' : 'claim unsupported' });
      if (!claim.supported) li.append(el('strong', { class: 'flag' }, `Not supported by its sources${claim.reason ? ` (${REASON_TEXT[claim.reason]})` : ''}, so left out of the answer: `));
      li.append(el('span', { class: 'claim-text' }, claim.text));
      const cited = claim.sources.map((n) => byN.get(n)).filter((c): c is Citation => c !== undefined);
      if (cited.length > 0) li.append(' ', el('span', { class: 'refs', role: 'group', 'aria-label': 'Sources' }, ...cited.map(sourceButton)));
      list.append(li);
    }
    const notes = el('ol', { class: 'footnotes', 'aria-label': 'Sources of this answer' });
    for (const c of done.citations) {
      const b = el('button', { type: 'button', class: 'footnote-open' }, footnote(c.n, c).replace(/^\[\d+\] /, ''));
      b.addEventListener('click', () => openCitation(c, b));
      notes.append(el('li', { value: String(c.n) }, b));
    }
    // The figure is a share measured on other organisations' documents, not a promise about this one.
    const confidence = el(
      'p',
      { class: 'confidence' },
      done.confidenceCalibrated
        ? `Confidence ${Math.round(done.confidence * 100)}%: a rough guide. It was measured on other organisations' documents, where it was off by up to 30 points either way; check the quoted source.`
        : `Evidence score ${Math.round(done.confidence * 100)} of 100 (not calibrated for this set-up).`,
    );
    live.replaceChildren(list, el('h3', {}, 'Sources'), notes, confidence);
  }
  $('answer-tools').hidden = false;
}

// Staff read these beside a claim the service left out, so they say what to check, in plain words.
const REASON_TEXT: Record<NonNullable<Claim['reason']>, string> = {
  citation: 'it cites no source',
  planted: 'it repeats text planted in a document to steer automated readers',
  overlap: 'its cited passage does not say it',
  figure: 'a figure in it is not what the cited passage states',
  polarity: 'it says the opposite of the cited passage',
};

function renderTurns(): void {
  const list = $('turns');
  const items: HTMLLIElement[] = [];
  // Every exchange but the one on screen.
  for (let i = 0; i + 1 < history.length - 1; i += 2) {
    const q = history[i]!;
    const a = history[i + 1]!;
    items.push(el('li', {}, el('p', { class: 'turn-q' }, q.content), el('p', { class: 'turn-a' }, a.content.replace(/\s*\[\d+(?:,\s*\d+)*\]/g, '').slice(0, 240))));
  }
  list.replaceChildren(...items);
  $('turns-section').hidden = items.length === 0;
}

function newEnquiry(): void {
  inFlight?.abort();
  history = [];
  shown = null;
  renderTurns();
  $('answer').hidden = true;
  $('answer-live').replaceChildren();
  closeReader();
  const q = $<HTMLTextAreaElement>('question');
  q.value = '';
  q.focus();
}

// ---- the source reader ----

function closeReader(): void {
  $('reader-card').hidden = true;
  $('reader-empty').hidden = false;
  readerDoc = null;
}

function showCard(meta: { n: string; title: string; section: string; page: number | null; pageEnd?: number | null; effective: string | null; version?: string | null | undefined; file: string }): void {
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
  if (!shown) return;
  const col = shown.collection;
  readerDoc = { collection: col, documentId: c.documentId, page: c.page, format: /\.pdf$/i.test(c.source) ? 'pdf' : 'other' };
  showCard({ n: `Source ${c.n}`, title: c.title, section: c.section, page: c.page, effective: c.effectiveDate, version: c.version, file: c.source });
  const box = $('reader-passage');
  // The quote alone first, so the reader is never empty while the context loads.
  box.replaceChildren(el('p', {}, el('mark', {}, c.quote)));
  focusReader(from);
  try {
    const p = await apiJson<Passage>(
      `/v1/collections/${encodeURIComponent(col)}/documents/${encodeURIComponent(c.documentId)}/passage?start=${c.start}&end=${c.end}`,
    );
    if (readerDoc?.documentId !== c.documentId) return;
    box.replaceChildren(
      el('p', { class: 'passage-text' }, p.before.trimStart(), el('mark', {}, p.quote), p.after.trimEnd()),
    );
    if (c.page === null && p.page !== null) $('reader-page').textContent = String(p.page);
    box.querySelector('mark')?.scrollIntoView({ block: 'nearest' });
  } catch (err) {
    if (!(err instanceof Cancelled)) $('reader-status').textContent = `Only the quote is shown: the surrounding text could not be loaded (${(err as Error).message}).`;
  }
}

function openSummary(s: SourceSummary, from: HTMLElement): void {
  if (!shown) return;
  readerDoc = { collection: shown.collection, documentId: s.documentId, page: s.page, format: /\.pdf$/i.test(s.source) ? 'pdf' : 'other' };
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
    const link = await apiJson<{ path: string }>(
      `/v1/collections/${encodeURIComponent(doc.collection)}/documents/${encodeURIComponent(doc.documentId)}/original-link`,
      { method: 'POST' },
    );
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

// ---- copy and rate ----

async function copyForTicket(): Promise<void> {
  if (!shown) return;
  const text = ticketText(shown.done);
  try {
    await navigator.clipboard.writeText(text);
  } catch {
    // Without a secure context there is no clipboard API: copy from a selected, off-screen text box.
    const area = el('textarea', { class: 'offscreen', 'aria-hidden': 'true', tabindex: '-1' });
    area.value = text;
    document.body.append(area);
    area.select();
    document.execCommand('copy');
    area.remove();
  }
  $('copy-status').textContent = 'Copied: the answer, its sources and the caution.';
}

function choose(helpful: boolean): void {
  rating = helpful;
  $('rate-yes').setAttribute('aria-pressed', String(helpful));
  $('rate-no').setAttribute('aria-pressed', String(!helpful));
  $('rating-status').textContent = '';
}

async function sendRating(): Promise<void> {
  const status = $('rating-status');
  if (!shown) return;
  if (rating === null) {
    status.textContent = 'Choose Helpful or Not helpful first.';
    return;
  }
  const { done } = shown;
  const comment = $<HTMLTextAreaElement>('rating-comment').value.trim();
  try {
    await apiJson(
      '/v1/ratings',
      postJson({
        collection: shown.collection,
        question: shown.asked,
        ...(done.question !== shown.asked ? { answeredQuestion: done.question } : {}),
        ...(shown.history.length > 0 ? { history: shown.history } : {}),
        answer: done.answer,
        abstained: done.abstained,
        sources: done.citations.map(({ n, documentId, source, title, page, section, quote }) => ({ n, documentId, source, title, page, section, quote })),
        helpful: rating,
        ...(comment ? { comment } : {}),
      }),
    );
    status.textContent = 'Thank you: the rating is saved.';
  } catch (err) {
    if (!(err instanceof Cancelled)) status.textContent = `The rating was not saved: ${(err as Error).message}`;
  }
}

// ---- wiring ----

function start(): void {
  setUpKeyDialog();
  const q = $<HTMLTextAreaElement>('question');
  $<HTMLFormElement>('ask-form').addEventListener('submit', (ev) => {
    ev.preventDefault();
    const question = q.value.trim();
    if (!question) {
      $('ask-status').textContent = 'Type a question first.';
      q.focus();
      return;
    }
    q.value = '';
    void ask(question);
  });
  q.addEventListener('keydown', (ev) => {
    if (ev.key === 'Enter' && !ev.shiftKey && !ev.isComposing) {
      ev.preventDefault();
      $<HTMLFormElement>('ask-form').requestSubmit();
    }
  });
  $('new-enquiry').addEventListener('click', newEnquiry);
  $<HTMLSelectElement>('collection').addEventListener('change', () => {
    sessionStorage.setItem(COLLECTION_STORE, collection());
    // Earlier turns belong to the other collection's documents.
    newEnquiry();
  });
  $('copy-ticket').addEventListener('click', () => void copyForTicket());
  $('rate-yes').addEventListener('click', () => choose(true));
  $('rate-no').addEventListener('click', () => choose(false));
  $<HTMLFormElement>('rating-form').addEventListener('submit', (ev) => {
    ev.preventDefault();
    void sendRating();
  });
  $('open-original').addEventListener('click', () => void openOriginal());
  $('reader-back').addEventListener('click', () => {
    (openedFrom?.isConnected ? openedFrom : $('answer-heading')).focus();
  });
  void loadCollections();
}

start();
