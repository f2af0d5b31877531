// Display formatting shared by the views (numbers as the engine prints them, dates in the user's locale).
export { formatNumber, formatPValue, formatQuantity } from '../../../shared/engine/format';

const dateTime = new Intl.DateTimeFormat(undefined, { dateStyle: 'medium', timeStyle: 'short' });

export function formatDateTime(iso: string | null | undefined): string {
  if (!iso) return '—';
  const d = new Date(iso);
  return Number.isNaN(d.getTime()) ? iso : dateTime.format(d);
}

/** A long hex seal shortened for tables: first 10 and last 6 characters. */
export function shortSeal(seal: string | null | undefined): string {
  if (!seal) return '—';
  return seal.length > 20 ? `${seal.slice(0, 10)}…${seal.slice(-6)}` : seal;
}
