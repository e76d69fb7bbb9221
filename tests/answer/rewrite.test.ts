import { describe, expect, it } from 'vitest';
import { rewriteMessages, rewriteQuestion, standaloneQuestion } from '../../src/answer/rewrite.js';
import type { ChatMessage, CompletionClient } from '../../src/answer/types.js';

const history = [
  { role: 'user' as const, content: 'How long do I have to claim a delay refund on a tram?' },
  { role: 'assistant' as const, content: 'Claims must be made within 28 days of the journey [1].' },
];

function client(reply: string | Error, seen: ChatMessage[][] = []): CompletionClient {
  return {
    complete: async (messages) => {
      seen.push(messages);
      if (reply instanceof Error) throw reply;
      return reply;
    },
  };
}

describe('rewriteQuestion', () => {
  it('uses the completion endpoint to rewrite a follow-up and says so', async () => {
    const seen: ChatMessage[][] = [];
    const r = await rewriteQuestion('And on buses?', history, client('How long do I have to claim a delay refund on a bus?', seen));
    expect(r).toEqual({ question: 'How long do I have to claim a delay refund on a bus?', method: 'completion' });
    expect(seen[0]?.[1]?.content).toContain('User: How long do I have to claim a delay refund on a tram?');
    expect(seen[0]?.[1]?.content).toContain('Follow-up: And on buses?');
  });

  it('falls back to carrying key terms when the endpoint fails', async () => {
    const r = await rewriteQuestion('And on buses?', history, client(new Error('down')));
    expect(r).toEqual({ question: standaloneQuestion('And on buses?', history), method: 'key_terms' });
    expect(r.question).toContain('refund');
  });

  it('rejects a rewrite that is an answer rather than a question of sensible length', async () => {
    const long = `Claims must be made within 28 days [1].\nAlso ${'very '.repeat(200)}long.`;
    const r = await rewriteQuestion('And on buses?', history, client(long));
    expect(r.method).toBe('key_terms');
  });

  it('leaves a question without earlier user turns as asked, without calling the endpoint', async () => {
    const seen: ChatMessage[][] = [];
    expect(await rewriteQuestion('  Are dogs allowed?  ', [], client('x', seen))).toEqual({ question: 'Are dogs allowed?' });
    expect(seen).toHaveLength(0);
  });

  it('strips a label and quotes the model put around the rewritten question', async () => {
    const r = await rewriteQuestion('And on buses?', history, client('Standalone question: "Can I claim a delay refund on a bus?"'));
    expect(r.question).toBe('Can I claim a delay refund on a bus?');
  });
});

describe('rewriteMessages', () => {
  it('sends only the recent turns, each cut to a bounded length', () => {
    const many = Array.from({ length: 10 }, (_, i) => ({ role: 'user' as const, content: `turn ${i} ${'x'.repeat(1000)}` }));
    const [, user] = rewriteMessages('and then?', many);
    expect(user?.content).not.toContain('turn 3 ');
    expect(user?.content).toContain('turn 9 ');
    expect(user?.content.length).toBeLessThan(6 * 700 + 200);
  });
});

describe('offline follow-up condensation rules', () => {
  it('stops a replaced phrase at a conjunction, so a particle ("packed in") does not drop the rest of the question', () => {
    const q = standaloneQuestion('And in the spring?', [{ role: 'user', content: 'The lift broke down in the winter and the stairs are icy, how soon is it fixed?' }]);
    expect(q).toContain('stairs');
    expect(q).not.toContain('winter');
  });

  it('keeps the previous question\'s opener wherever it stood, and a follow-up\'s own opener after "and"', () => {
    expect(standaloneQuestion('And at the depot?', [{ role: 'user', content: 'For a night shift at the garage, how many staff must be present?' }])).toMatch(/^how many /);
    expect(standaloneQuestion('And how many times can I renew it?', [{ role: 'user', content: 'How long is the loan period for a map?' }])).not.toMatch(/^how long/);
  });

  it('replaces a labelled noun the follow-up names with another label ("Zone A" after "Zone C")', () => {
    const q = standaloneQuestion('What about Zone A?', [{ role: 'user', content: 'How much is a weekly pass in Zone C for a student?' }]);
    expect(q).toContain('Zone A');
    expect(q).not.toContain('Zone C');
    expect(q).toMatch(/weekly/);
    expect(q).toMatch(/student/);
  });
});
