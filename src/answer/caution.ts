// Shown with every answer, abstained or not: the service quotes documents, it does not decide.
export const CAUTION =
  'This answer is drawn only from the cited documents, so check the quoted source before acting on it. ' +
  'For legal, medical, safety or HR decisions, ask the responsible staff and follow local rules.';
