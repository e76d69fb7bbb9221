import { z } from 'zod';
import { configSchema } from './schema.js';
import { ENV_BINDINGS } from './load.js';

/** Markdown table of every option: key, default, environment variable, description. Kept in docs/configuration.md. */
export function configReference(): string {
  const defaults = configSchema.parse({}) as Record<string, unknown>;
  const rows: string[] = ['| key | default | env | description |', '|---|---|---|---|'];
  const envOf = new Map(ENV_BINDINGS.map((b) => [b.path.join('.'), b.name]));
  const walk = (schema: z.ZodType, prefix: string[], value: unknown): void => {
    const inner = unwrap(schema);
    if (inner instanceof z.ZodObject) {
      for (const [key, child] of Object.entries(inner.shape as Record<string, z.ZodType>)) {
        walk(child, [...prefix, key], (value as Record<string, unknown> | undefined)?.[key]);
      }
      return;
    }
    const key = prefix.join('.');
    const desc = (schema.description ?? inner.description ?? '').replace(/\|/g, '\\|');
    rows.push(`| \`${key}\` | \`${JSON.stringify(value)}\` | ${envOf.has(key) ? `\`${envOf.get(key)}\`` : ''} | ${desc} |`);
  };
  walk(configSchema, [], defaults);
  return rows.join('\n');
}

function unwrap(s: z.ZodType): z.ZodType {
  let cur: z.ZodType = s;
  for (;;) {
    const def = (cur as unknown as { _zod: { def: { type: string; innerType?: z.ZodType } } })._zod.def;
    if ((def.type === 'default' || def.type === 'prefault' || def.type === 'optional' || def.type === 'nullable') && def.innerType) {
      cur = def.innerType;
    } else return cur;
  }
}
