import type { RulebookChoice, RulebookId, RulebookInfo, TneResult, Unit } from '../types';
import type { Rulebook } from './types';
import { eu76211 } from './eu76211';
import { oimlR87 } from './oimlR87';
import { uk2006659 } from './uk2006659';
import { caWmRegs } from './caWmRegs';
import { auNtmr2009 } from './auNtmr2009';
import { nzWmRegs1999 } from './nzWmRegs1999';
import { cnJjf1070 } from './cnJjf1070';
import { usNistHb133 } from './usNistHb133';
import { custom } from './custom';

const RULEBOOKS: Readonly<Record<RulebookId, Rulebook>> = {
  'eu-76-211': eu76211,
  'oiml-r87-2016': oimlR87,
  'uk-2006-659': uk2006659,
  'ca-wm-regs': caWmRegs,
  'au-ntmr-2009': auNtmr2009,
  'nz-wm-regs-1999': nzWmRegs1999,
  'cn-jjf-1070': cnJjf1070,
  'us-nist-hb133': usNistHb133,
  custom,
};

export function rulebookFor(id: unknown): Rulebook | null {
  return typeof id === 'string' && Object.prototype.hasOwnProperty.call(RULEBOOKS, id) ? RULEBOOKS[id as RulebookId] : null;
}

/** Every shipped rulebook with its version, edition, scope, source citation, provenance and parameters. */
export function listRulebooks(): RulebookInfo[] {
  return Object.values(RULEBOOKS).map((r) => structuredClone(r.info));
}

/**
 * Tolerable negative error (limit of error, MAV) for a nominal quantity `qn` declared in `unit`,
 * by the rulebook's own table (default eu-76-211), in that unit and as the table states it.
 */
export function tolerableNegativeError(qn: number, unit: Unit, rulebookId: string = 'eu-76-211', params?: RulebookChoice['params']): TneResult {
  const rb = rulebookFor(rulebookId);
  if (rb === null) return { ok: false, reason: `unknown rulebook ${JSON.stringify(rulebookId)}` };
  if (!rb.tne) return { ok: false, reason: `${rulebookId} has no tolerable negative error` };
  return rb.tne(qn, unit, params);
}
