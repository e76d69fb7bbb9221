import path from 'node:path';

/** Where things live under the data folder. */
export function storePaths(dataDir: string): { database: string; indexDir: string; originalsDir: string } {
  return { database: path.join(dataDir, 'sourcebound.db'), indexDir: path.join(dataDir, 'index'), originalsDir: path.join(dataDir, 'originals') };
}
