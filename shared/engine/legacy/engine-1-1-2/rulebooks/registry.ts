import type { RulebookId, RulebookInfo } from '../types';
import type { Rulebook } from './types';
import { eu76211 } from './eu76211';
import { oimlR87 } from './oimlR87';
import { custom } from './custom';

const RULEBOOKS: Readonly<Record<RulebookId, Rulebook>> = {
  'eu-76-211': eu76211,
  'oiml-r87-2016': oimlR87,
  custom,
};

export function rulebookFor(id: unknown): Rulebook | null {
  return typeof id === 'string' && Object.prototype.hasOwnProperty.call(RULEBOOKS, id) ? RULEBOOKS[id as RulebookId] : null;
}

/** Every shipped rulebook with its version, source citation and parameters. */
export function listRulebooks(): RulebookInfo[] {
  return Object.values(RULEBOOKS).map((r) => structuredClone(r.info));
}
