/** A value that may be undefined for the data at hand: either the value, or null with the reason. Never NaN. */
export type Maybe<T> = { value: T; reason: null } | { value: null; reason: string };

export function some<T>(value: T): Maybe<T> {
  return { value, reason: null };
}

export function none<T>(reason: string): Maybe<T> {
  return { value: null, reason };
}
