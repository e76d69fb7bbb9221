// A from-scratch reference of BERT's tokenization, used to check the pipeline independently of
// transformers.js: lower-case, split on whitespace and punctuation, then greedy longest-match-first
// WordPiece with "##" continuations (Devlin et al. 2019; the algorithm in google-research/bert
// tokenization.py). Enough for the ASCII sentences the tests use.
export function referenceWordPiece(text: string, vocab: string[]): number[] {
  const index = new Map(vocab.map((token, i) => [token, i]));
  const unk = index.get('[UNK]') as number;
  const words = text.toLowerCase().match(/[a-z0-9]+|[^\sa-z0-9]/g) ?? [];
  const ids: number[] = [];
  for (const word of words) {
    const pieces: number[] = [];
    let start = 0;
    let failed = false;
    while (start < word.length) {
      let end = word.length;
      let found: number | undefined;
      while (start < end) {
        const piece = (start > 0 ? '##' : '') + word.slice(start, end);
        found = index.get(piece);
        if (found !== undefined) break;
        end--;
      }
      if (found === undefined) {
        failed = true;
        break;
      }
      pieces.push(found);
      start = end;
    }
    ids.push(...(failed ? [unk] : pieces));
  }
  return ids;
}

/** Sentence-BERT mean pooling (Reimers and Gurevych 2019) over the given rows, then L2 normalisation. */
export function meanPoolNormalise(ids: number[], table: Float32Array[], dims: number): Float64Array {
  const out = new Float64Array(dims);
  for (const id of ids) {
    const row = table[id] as Float32Array;
    for (let d = 0; d < dims; d++) out[d] = (out[d] as number) + (row[d] as number);
  }
  let sumSquares = 0;
  for (let d = 0; d < dims; d++) {
    out[d] = (out[d] as number) / ids.length;
    sumSquares += (out[d] as number) ** 2;
  }
  const n = Math.sqrt(sumSquares);
  for (let d = 0; d < dims; d++) out[d] = (out[d] as number) / n;
  return out;
}
