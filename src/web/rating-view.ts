// Under the answer: copy it for a ticket, and rate it.

import { apiJson, Cancelled, postJson } from './api.js';
import { $, el } from './dom.js';
import type { DeskState } from './state.js';
import { ticketText } from './ticket.js';
import type { RatingRequest } from './types.js';

export interface AnswerTools {
  /** A new answer is on screen: no rating chosen, no status shown. */
  reset(abstained: boolean): void;
}

export function createAnswerTools(state: DeskState): AnswerTools {
  let rating: boolean | null = null;

  async function copyForTicket(): Promise<void> {
    if (!state.shown) return;
    const text = ticketText(state.shown.done);
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
    const shown = state.shown;
    if (!shown) return;
    if (rating === null) {
      status.textContent = 'Choose Helpful or Not helpful first.';
      return;
    }
    const { done } = shown;
    const comment = $<HTMLTextAreaElement>('rating-comment').value.trim();
    const body: RatingRequest = {
      collection: shown.collection,
      question: shown.asked,
      ...(done.question !== shown.asked ? { answeredQuestion: done.question } : {}),
      ...(shown.history.length > 0 ? { history: shown.history } : {}),
      answer: done.answer,
      abstained: done.abstained,
      sources: done.citations.map(({ n, documentId, source, title, page, section, quote }) => ({ n, documentId, source, title, page, section, quote })),
      helpful: rating,
      ...(comment ? { comment } : {}),
    };
    try {
      await apiJson('/v1/ratings', postJson(body));
      status.textContent = 'Thank you: the rating is saved.';
    } catch (err) {
      if (!(err instanceof Cancelled)) status.textContent = `The rating was not saved: ${(err as Error).message}`;
    }
  }

  $('copy-ticket').addEventListener('click', () => void copyForTicket());
  $('rate-yes').addEventListener('click', () => choose(true));
  $('rate-no').addEventListener('click', () => choose(false));
  $<HTMLFormElement>('rating-form').addEventListener('submit', (ev) => {
    ev.preventDefault();
    void sendRating();
  });

  return {
    reset(abstained) {
      rating = null;
      for (const id of ['rate-yes', 'rate-no']) $(id).setAttribute('aria-pressed', 'false');
      $<HTMLTextAreaElement>('rating-comment').value = '';
      $('rating-status').textContent = '';
      $('copy-status').textContent = '';
      $<HTMLButtonElement>('copy-ticket').hidden = abstained;
    },
  };
}
