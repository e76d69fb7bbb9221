// The reference desk: ask a question of one collection, read the cited answer as it streams in,
// check each source passage beside it, copy the answer for a ticket, and rate it. This file wires the
// views (answer-view.ts, reader-view.ts, rating-view.ts) to the page and to one shared state.

import { apiJson, Cancelled, setUpKeyDialog } from './api.js';
import { createAnswerView } from './answer-view.js';
import { $, el } from './dom.js';
import { createAnswerTools } from './rating-view.js';
import { createReader } from './reader-view.js';
import { createState } from './state.js';
import type { Collections } from './types.js';

const COLLECTION_STORE = 'sourcebound.collection';

const collection = (): string => $<HTMLSelectElement>('collection').value;

async function loadCollections(): Promise<void> {
  const select = $<HTMLSelectElement>('collection');
  try {
    const { collections } = await apiJson<Collections>('/v1/collections');
    const wanted = sessionStorage.getItem(COLLECTION_STORE) ?? select.value;
    select.replaceChildren(...collections.map((c) => el('option', { value: c.name }, `${c.name} (${c.documents} documents)`)));
    if (collections.some((c) => c.name === wanted)) select.value = wanted;
    $('ask-status').textContent = collections.length === 0 ? 'No collections are visible to this key.' : '';
  } catch (err) {
    if (!(err instanceof Cancelled)) $('ask-status').textContent = `Could not list the collections: ${(err as Error).message}`;
  }
}

function start(): void {
  const state = createState();
  const view = createAnswerView(state, createReader(state), createAnswerTools(state));
  setUpKeyDialog(() => void loadCollections());
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
    void view.ask(question, collection());
  });
  q.addEventListener('keydown', (ev) => {
    if (ev.key === 'Enter' && !ev.shiftKey && !ev.isComposing) {
      ev.preventDefault();
      $<HTMLFormElement>('ask-form').requestSubmit();
    }
  });
  $('new-enquiry').addEventListener('click', view.newEnquiry);
  $<HTMLSelectElement>('collection').addEventListener('change', () => {
    sessionStorage.setItem(COLLECTION_STORE, collection());
    // Earlier turns belong to the other collection's documents.
    view.newEnquiry();
  });
  void loadCollections();
}

start();
