// Asking: the question streams in as an answer, sentence by sentence with its sources, or as an
// abstention with the closest passages; earlier turns of the enquiry are listed beneath.

import { api, ApiError, Cancelled, failure, postJson } from './api.js';
import { $, el } from './dom.js';
import type { Reader } from './reader-view.js';
import type { AnswerTools } from './rating-view.js';
import { readServerEvents } from './sse.js';
import { MAX_TURNS, type DeskState, type Shown } from './state.js';
import { footnote, sectionLabel } from './ticket.js';
import type { AnswerDone, Citation, Claim, DeltaEvent, SourcesEvent, SourceSummary, StreamErrorEvent } from './types.js';

// Staff read these beside a claim the service left out, so they say what to check, in plain words.
const REASON_TEXT: Record<NonNullable<Claim['reason']>, string> = {
  citation: 'it cites no source',
  planted: 'it repeats text planted in a document to steer automated readers',
  overlap: 'its cited passage does not say it',
  figure: 'a figure in it is not what the cited passage states',
  polarity: 'it says the opposite of the cited passage',
};

export interface AnswerView {
  ask(question: string, collection: string): Promise<void>;
  /** Forgets the enquiry: a new customer, or another collection. */
  newEnquiry(): void;
}

export function createAnswerView(state: DeskState, reader: Reader, tools: AnswerTools): AnswerView {
  function setBusy(busy: boolean): void {
    $('answer-live').setAttribute('aria-busy', String(busy));
    $<HTMLButtonElement>('ask-button').disabled = busy;
  }

  async function ask(question: string, col: string): Promise<void> {
    state.inFlight?.abort();
    const controller = new AbortController();
    state.inFlight = controller;
    const earlier = state.history.slice(-MAX_TURNS);
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
          sources = (JSON.parse(ev.data) as SourcesEvent).sources;
        } else if (ev.event === 'delta') {
          const d = JSON.parse(ev.data) as DeltaEvent;
          text = d.reset ? d.text : text + d.text;
          paragraph ??= el('p', { class: 'streaming' });
          paragraph.textContent = text;
          if (!paragraph.isConnected) live.replaceChildren(paragraph);
        } else if (ev.event === 'done') {
          done = JSON.parse(ev.data) as AnswerDone;
        } else if (ev.event === 'error') {
          const e = (JSON.parse(ev.data) as StreamErrorEvent).error;
          throw new ApiError(200, e.code, e.message);
        }
      }
      if (!done) throw new Error('the answer stream ended early; ask again');
      if (controller.signal.aborted) return;
      state.shown = { asked: question, history: earlier, collection: col, done, sources };
      renderAnswer(state.shown);
      state.history = [...state.history, { role: 'user' as const, content: question }, { role: 'assistant' as const, content: done.answer }].slice(-MAX_TURNS);
      renderTurns();
    } catch (err) {
      if (controller.signal.aborted || err instanceof Cancelled) {
        if (err instanceof Cancelled) live.replaceChildren(el('p', {}, 'Not asked: the service needs an API key.'));
        return;
      }
      live.replaceChildren(el('p', { class: 'error' }, `The question could not be answered: ${(err as Error).message}`));
    } finally {
      if (state.inFlight === controller) {
        state.inFlight = null;
        setBusy(false);
      }
    }
  }

  function sourceButton(c: Citation): HTMLButtonElement {
    const b = el('button', { type: 'button', class: 'src', 'aria-label': `Source ${c.n}: ${c.title}${c.page !== null ? `, page ${c.page}` : ''}` }, String(c.n));
    b.addEventListener('click', () => void reader.openCitation(c, b));
    return b;
  }

  function renderAbstention(s: Shown): Node[] {
    const parts: Node[] = [el('p', { class: 'abstained' }, s.done.answer)];
    if (s.sources.length === 0) return [...parts, el('p', { class: 'hint' }, 'No passage came close to the question.')];
    const list = el('ol', { class: 'closest' });
    for (const src of s.sources) {
      const b = el('button', { type: 'button', class: 'closest-open' }, src.title);
      b.addEventListener('click', () => reader.openSummary(src, b));
      const where = [sectionLabel(src.title, src.section), src.page !== null ? `page ${src.page}` : ''].filter(Boolean).join(', ');
      list.append(el('li', {}, b, where ? el('span', { class: 'where' }, ` — ${where}`) : ''));
    }
    return [...parts, el('h3', {}, 'Closest passages'), el('p', { class: 'hint' }, 'These came nearest to the question but do not answer it. Read them before telling the customer.'), list];
  }

  function renderCited(done: AnswerDone): Node[] {
    const byN = new Map(done.citations.map((c) => [c.n, c]));
    const claims: Pick<Claim, 'text' | 'sources' | 'supported' | 'reason'>[] =
      done.claims && done.claims.length > 0 ? done.claims : [{ text: done.answer, sources: done.citations.map((c) => c.n), supported: true }];
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
      b.addEventListener('click', () => void reader.openCitation(c, b));
      notes.append(el('li', { value: String(c.n) }, b));
    }
    // The figure is a share measured on other organisations' documents, not a promise about this one.
    const confidence = el(
      'p',
      { class: 'confidence' },
      done.confidenceCalibrated
        ? `Confidence ${Math.round(done.confidence * 100)}%: a rough guide. It was measured on other organisations' documents${
            done.confidenceError !== undefined ? `, where it was off by up to ${Math.round(done.confidenceError * 100)} points either way` : ''
          }; check the quoted source.`
        : `Evidence score ${Math.round(done.confidence * 100)} of 100 (not calibrated for this set-up).`,
    );
    return [list, el('h3', {}, 'Sources'), notes, confidence];
  }

  function renderAnswer(s: Shown): void {
    const { done } = s;
    $('caution-text').textContent = done.caution;
    const asked = $('asked-as');
    // The question stays in view beside its answer; a rewritten follow-up shows what was really asked.
    if (done.rewrittenBy || done.question.trim() !== s.asked.trim()) {
      asked.replaceChildren('Answered as the standalone question: ', el('q', {}, done.question));
    } else {
      asked.replaceChildren('Question: ', el('q', {}, s.asked));
    }
    asked.hidden = false;
    tools.reset(done.abstained);
    if (done.abstained) $('answer-heading').textContent = 'Not in the documents';
    $('answer-live').replaceChildren(...(done.abstained ? renderAbstention(s) : renderCited(done)));
    $('answer-tools').hidden = false;
  }

  function renderTurns(): void {
    const items: HTMLLIElement[] = [];
    const history = state.history;
    // Every exchange but the one on screen.
    for (let i = 0; i + 1 < history.length - 1; i += 2) {
      const q = history[i]!;
      const a = history[i + 1]!;
      items.push(el('li', {}, el('p', { class: 'turn-q' }, q.content), el('p', { class: 'turn-a' }, a.content.replace(/\s*\[\d+(?:,\s*\d+)*\]/g, '').slice(0, 240))));
    }
    $('turns').replaceChildren(...items);
    $('turns-section').hidden = items.length === 0;
  }

  function newEnquiry(): void {
    state.inFlight?.abort();
    state.history = [];
    state.shown = null;
    renderTurns();
    $('answer').hidden = true;
    $('answer-live').replaceChildren();
    reader.close();
    const q = $<HTMLTextAreaElement>('question');
    q.value = '';
    q.focus();
  }

  return { ask, newEnquiry };
}
