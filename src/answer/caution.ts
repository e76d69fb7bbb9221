// Shown with every answer, abstained or not: the service quotes documents, it does not decide.
export const CAUTION =
  'This answer comes only from the cited documents: check the quoted source before acting on it. ' +
  'It is not legal or medical advice. ' +
  'For legal, medical, safety or HR decisions, defer to local rules and to the responsible staff or a licensed professional.';
