// Parsers for option values: a malformed value is refused while the command line is read, in one line
// naming the option, before any work starts (exit 2).

import { InvalidArgumentError } from 'commander';
import { COLLECTION_NAME, COLLECTION_NAME_RULE } from '../api/schemas.js';
import { usageError } from './context.js';

/** A collection name, by the same rule as the API's. */
export function collectionArg(raw: string): string {
  if (!COLLECTION_NAME.test(raw)) throw new InvalidArgumentError(`It must be ${COLLECTION_NAME_RULE.replace(/^a collection name is /, '')}.`);
  return raw;
}

/** A whole number from `min` to `max`. */
export function wholeNumber(min: number, max = Number.MAX_SAFE_INTEGER): (raw: string) => number {
  return (raw) => {
    const n = Number(raw);
    if (raw.trim() === '' || !Number.isInteger(n) || n < min || n > max) {
      throw new InvalidArgumentError(max === Number.MAX_SAFE_INTEGER ? `It must be a whole number from ${min}.` : `It must be an integer from ${min} to ${max}.`);
    }
    return n;
  };
}

/** A number from `min` to `max`. */
export function numberIn(min: number, max: number): (raw: string) => number {
  return (raw) => {
    const n = Number(raw);
    if (raw.trim() === '' || !Number.isFinite(n) || n < min || n > max) throw new InvalidArgumentError(`It must be a number from ${min} to ${max}.`);
    return n;
  };
}

/** A comma-separated list, blanks dropped. */
export function commaList(value: string): string[] {
  return value.split(',').map((s) => s.trim()).filter(Boolean);
}

/** For an option that may be repeated and may hold comma-separated values: every value, in order. */
export function collectList(value: string, previous: string[] = []): string[] {
  return [...previous, ...commaList(value)];
}

/**
 * Options a command cannot run without, all named at once. Checked in the handler rather than by the
 * library, so that an unknown option is reported as such even when a required one is missing too.
 */
export function requireOptions<T extends object>(opts: T, names: readonly (keyof T & string)[]): void {
  const missing = names.filter((n) => opts[n] === undefined);
  if (missing.length > 0) throw usageError(`missing ${missing.map((m) => `--${m.replace(/[A-Z]/g, (c) => `-${c.toLowerCase()}`)}`).join(', ')}`);
}
