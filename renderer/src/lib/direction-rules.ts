// What the app offers on a direction row, from what the engine will allow. Pure, unit-tested.
import type { DirectionInfo } from '../../../app/protocol/messages.ts';

/**
 * Why renaming a direction would be refused, or null when it can be renamed. The engine keeps the
 * name of a direction with sign-off or audit history in the project (its review log and audits
 * are keyed by name; app/engine/project.ts renameDirection), and the row's sign-off carries both.
 */
export function renameRefusal(d: DirectionInfo): string | null {
  const reviews = d.signOff?.history.length ?? 0;
  const audits = d.signOff?.audits?.length ?? 0;
  if (!reviews && !audits) return null;
  const what = [reviews ? `${reviews} sign-off step${reviews === 1 ? '' : 's'}` : '', audits ? `${audits} audit${audits === 1 ? '' : 's'}` : ''].filter(Boolean).join(' and ');
  return `Cannot rename ${d.name}: it has ${what} on record, kept under its name.`;
}
