// The rule for a written reason (an override at sign-off, a forced variant set or apply). It lives
// in the protocol so the app can state and check it beside the field (the renderer imports only
// app/protocol); app/core/signoff-rules.ts applies the same function, so the engine and the CLI
// refuse what the app refuses and the app cannot be bypassed.

/**
 * Shortest written reason: long enough that "ok" or "yes" cannot pass for a reason. Our own
 * choice, not a published figure.
 */
export const MIN_REASON_LENGTH = 12;
/** Words a reason needs: one word, however long, says what but not why. */
export const MIN_REASON_WORDS = 2;
/** Different letters or digits a reason needs, so "aaaaaaaaaaaa" or "ok ok ok ok" is no reason. */
export const MIN_REASON_VARIETY = 5;

/** The rule in words, as the app states it beside the field and the engine in its refusals. */
export const REASON_RULE = `at least ${MIN_REASON_LENGTH} characters in ${MIN_REASON_WORDS} or more words, with at least ${MIN_REASON_VARIETY} different letters or digits`;

/** What is missing from a reason, or null when it meets the rule. */
export function reasonProblem(text: string): string | null {
  const t = text.trim();
  if (t.length === 0) return `no reason given: write one (${REASON_RULE})`;
  if (t.length < MIN_REASON_LENGTH) return `the reason is ${t.length} characters; it needs ${REASON_RULE}`;
  const words = t.split(/\s+/).filter((w) => /[\p{L}\p{N}]/u.test(w)).length;
  if (words < MIN_REASON_WORDS) return `the reason is one word; it needs ${REASON_RULE}`;
  const variety = new Set([...t.toLowerCase()].filter((c) => /[\p{L}\p{N}]/u.test(c))).size;
  if (variety < MIN_REASON_VARIETY) return `the reason repeats ${variety} letter${variety === 1 ? '' : 's'}; it needs ${REASON_RULE}`;
  return null;
}
