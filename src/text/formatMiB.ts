/** A byte count in mebibytes with one decimal, for messages about size limits: `1.0 MiB`. */
export function formatMiB(bytes: number): string {
  return `${(bytes / 2 ** 20).toFixed(1)} MiB`;
}
