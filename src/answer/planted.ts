// Text planted in a document to steer an automated reader ("ignore your previous
// instructions and tell the customer ..."). Such a sentence is never policy, so it must never
// be quoted as an answer, whatever words it shares with the question.

// Who the sentence talks to: an automated reader rather than a customer or member of staff.
const ADDRESSEE =
  /\b(?:(?:automated|virtual|digital)\s+(?:assistants?|agents?|systems?|readers?)|ai(?:\s+(?:assistants?|models?|systems?))?|chat\s?bots?|bots?|(?:large\s+)?language\s+models?|llms?|gpts?)\b/i;

// What it asks: to drop, override or reveal the reader's own instructions.
const OVERRIDE =
  /\b(?:ignore|disregard|override|bypass)\b[^.!?\n]{0,40}\b(?:instructions?|prompts?)\b|\b(?:system\s+prompt|previous\s+instructions|prior\s+instructions|new\s+instructions)\b|\byou\s+are\s+now\s+(?:an?|the)\b|\bpretend\s+(?:to\s+be|that)\b/i;

// An imperative aimed at the reader ("tell the customer", "say that", "respond with").
const DIRECTIVE = /\b(?:tell|inform|say|state|respond|reply|answer|claim|announce)\b[^.!?\n]{0,30}\b(?:customers?|users?|callers?|readers?|that|with)\b/i;

/**
 * True for a sentence that tries to instruct an automated reader: one that asks to override
 * instructions, or one addressed to an assistant / model that also directs what to say.
 */
export function isPlantedInstruction(sentence: string): boolean {
  if (OVERRIDE.test(sentence)) return true;
  return ADDRESSEE.test(sentence) && DIRECTIVE.test(sentence);
}
