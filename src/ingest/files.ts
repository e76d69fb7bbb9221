import { createHash } from 'node:crypto';
import { readdir } from 'node:fs/promises';
import path from 'node:path';

// Extensions looked at in a folder walk; other files are skipped without complaint. A file with no
// extension is looked at too, and its type is decided from its bytes.
const CANDIDATE_EXTENSIONS = new Set(['.pdf', '.docx', '.md', '.markdown', '.html', '.htm', '.txt', '.text', '']);

/** The candidate files under a folder, in name order; hidden entries and node_modules left out. */
export async function walk(dir: string): Promise<string[]> {
  const out: string[] = [];
  const entries = await readdir(dir, { withFileTypes: true });
  entries.sort((a, b) => (a.name < b.name ? -1 : a.name > b.name ? 1 : 0));
  for (const e of entries) {
    if (e.name.startsWith('.') || e.name === 'node_modules') continue;
    const full = path.join(dir, e.name);
    if (e.isDirectory()) out.push(...(await walk(full)));
    else if (e.isFile() && CANDIDATE_EXTENSIONS.has(path.extname(e.name).toLowerCase())) out.push(full);
  }
  return out;
}

/** Stable id of a document: the same collection and source always map to the same id. */
export function documentId(collection: string, source: string): string {
  return createHash('sha256').update(`${collection}\u0000${source}`).digest('hex').slice(0, 24);
}
