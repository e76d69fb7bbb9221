/**
 * What one chunk puts in each field of the lexical index. A chunk's text starts with the heading lines above it
 * and its heading path usually starts with the document title, so indexing them as they are counts the title up
 * to three times (title, heading and body fields) and outweighs the body. Each field keeps only what no other
 * field already holds; the field weights then decide how much a title or heading match is worth.
 */
export function ftsColumns(title: string, headingPath: readonly string[], text: string): { title: string; heading: string; body: string } {
  const t = title.trim();
  const headings = headingPath.map((h) => h.trim()).filter((h) => h !== '' && h !== t);
  const known = new Set([t, ...headings]);
  let body = text;
  for (;;) {
    const nl = body.indexOf('\n');
    const first = (nl < 0 ? body : body.slice(0, nl)).trim();
    if (first === '' && nl >= 0) {
      body = body.slice(nl + 1);
      continue;
    }
    if (!known.has(first)) break;
    body = nl < 0 ? '' : body.slice(nl + 1);
  }
  return { title: t, heading: headings.join(' > '), body };
}
