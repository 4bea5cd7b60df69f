/**
 * A severity zone letter is never shown without where its boundaries come from: the text
 * forms (replay --format text, the demo screen) add this after the zones of a status.
 */
export function zoneBasisText(severity: ReadonlyArray<{ zone_basis: string }>): string {
  // One basis per asset, said once however many sensors it has.
  return `zones: ${[...new Set(severity.map((s) => s.zone_basis))].join('; ')}`;
}
