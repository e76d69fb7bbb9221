import { describe, expect, it } from 'vitest';
import { chooseVersions, policyKey, versionNote } from '../../src/answer/versions.js';

const v2025 = { documentId: 'old', title: 'Delay Refunds Policy (2025)', effectiveDate: '2025-04-01' };
const v2026 = { documentId: 'new', title: 'Delay Refunds Policy (2026)', effectiveDate: '2026-03-01' };
const other = { documentId: 'lost', title: 'Lost Property', effectiveDate: '2026-01-05' };

describe('chooseVersions', () => {
  it('sees titles differing only by a year or version mark as one policy', () => {
    expect(policyKey('Delay Refunds Policy (2025)')).toBe(policyKey('Delay Refunds Policy 2026 v2'));
    expect(policyKey('Lost Property')).not.toBe(policyKey('Delay Refunds Policy'));
  });

  it('keeps only the newer version and records its effective date', () => {
    const r = chooseVersions('How long do I have to claim?', [v2025, other, v2026, v2025]);
    expect(r.kept.map((x) => x.documentId)).toEqual(['lost', 'new']);
    expect(r.dropped).toBe(2);
    expect(r.chosen.get('new')).toBe('2026-03-01');
    expect(versionNote('2026-03-01')).toBe('(from the version effective 2026-03-01)');
  });

  it('keeps the older version when the question asks about the old rules or names its year', () => {
    expect(chooseVersions('Was the limit different under the old policy?', [v2026, v2025]).kept.map((x) => x.documentId)).toEqual(['old']);
    expect(chooseVersions('What did the 2025 rules say?', [v2026, v2025]).kept.map((x) => x.documentId)).toEqual(['old']);
  });

  it('leaves documents alone when titles are identical or a date is missing', () => {
    const twin = { ...other, documentId: 'lost-2' };
    expect(chooseVersions('q', [other, twin]).dropped).toBe(0);
    expect(chooseVersions('q', [{ ...v2025, effectiveDate: null }, v2026]).dropped).toBe(0);
  });
});
