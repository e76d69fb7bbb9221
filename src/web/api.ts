// Calls to the service with the API key: asked for on a 401, kept in sessionStorage for this tab only.

import { $ } from './dom.js';

const KEY_STORE = 'sourcebound.key';

/** The member of staff closed the key dialog: the call is abandoned, quietly. */
export class Cancelled extends Error {}

export class ApiError extends Error {
  constructor(
    readonly status: number,
    readonly code: string,
    message: string,
  ) {
    super(message);
  }
}

let keyWaiters: { resolve: () => void; reject: (e: Error) => void }[] = [];

function currentKey(): string | null {
  return sessionStorage.getItem(KEY_STORE);
}

export function askForKey(message = ''): Promise<void> {
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

/** Wires the key dialog; `onKeyChanged` runs after a key is entered from the key button. */
export function setUpKeyDialog(onKeyChanged: () => void): void {
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
    void askForKey().then(onKeyChanged, () => undefined);
  });
}

/** fetch() with the key; a 401 asks for a key and tries again. */
export async function api(path: string, init: RequestInit = {}): Promise<Response> {
  for (let attempt = 0; ; attempt++) {
    const headers = new Headers(init.headers);
    const key = currentKey();
    if (key) headers.set('authorization', `Bearer ${key}`);
    const res = await fetch(path, { ...init, headers });
    if (res.status !== 401) return res;
    await askForKey(key || attempt > 0 ? 'That key was not accepted. Check it and try again.' : '');
  }
}

export async function failure(res: Response): Promise<ApiError> {
  try {
    const body = (await res.json()) as { error?: { code?: string; message?: string } };
    return new ApiError(res.status, body.error?.code ?? 'unknown', body.error?.message ?? res.statusText);
  } catch {
    return new ApiError(res.status, 'unknown', `The service answered ${res.status} ${res.statusText}`);
  }
}

export async function apiJson<T>(path: string, init: RequestInit = {}): Promise<T> {
  const res = await api(path, init);
  if (!res.ok) throw await failure(res);
  return (await res.json()) as T;
}

export const postJson = (body: unknown): RequestInit => ({ method: 'POST', headers: { 'content-type': 'application/json' }, body: JSON.stringify(body) });

/** The path of a document of a collection, its parts escaped. */
export const documentPath = (collection: string, documentId: string): string =>
  `/v1/collections/${encodeURIComponent(collection)}/documents/${encodeURIComponent(documentId)}`;
