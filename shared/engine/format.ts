/**
 * Deterministic number formatting for the sentences of a verdict (ECMAScript `toPrecision` is
 * exactly specified, so the same number always gives the same text on every engine).
 */

/** A number with at most `significant` significant digits, trailing zeros dropped, minus sign as U+2212. */
export function formatNumber(x: number, significant = 6): string {
  if (x === 0) return '0';
  let s = Number(x.toPrecision(significant)).toString();
  if (s.includes('e')) s = x.toPrecision(significant);
  return s.startsWith('-') ? `\u2212${s.slice(1)}` : s;
}

/** A quantity with its unit, e.g. "496.8 g". */
export function formatQuantity(x: number, unit: string, significant = 6): string {
  return `${formatNumber(x, significant)} ${unit}`;
}

/** A p-value: 4 significant digits, or "< 1e-16" style for vanishing values. */
export function formatPValue(p: number): string {
  if (p === 0) return '0';
  if (p < 1e-4) return p.toExponential(2).replace('-', '\u2212');
  return formatNumber(p, 4);
}
