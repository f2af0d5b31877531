// The second-sample rules: a lot whose first sample asked for more packs is judged again on both
// samples together. The first sample fixes the product spec as judged and the lot's data; a second
// sample must be of the same lot, measured the same way, and its measurements follow the first's.
// (That a first sample takes only one second sample is checked under the ledger lock.)
import { QueryTypes, type Sequelize } from 'sequelize';
import type { LotData, ProductSpec } from '../../shared/engine';
import type { components } from '../../shared/api/schema';
import { Conflict, Refused, type FieldIssue } from '../core/errors';
import type { VerdictRecord } from './verdict-records';

type LotSubmission = components['schemas']['LotSubmission'];

/** A stored first sample: its row's facts and its sealed record. */
export interface FirstSample {
  id: string;
  decision: string;
  seal: string;
  productId: string;
  record: VerdictRecord;
}

/** The verdict a second sample names, which must await one; fields are the submission's. */
export async function loadFirstSample(sequelize: Sequelize, organisationId: string, verdictId: string): Promise<FirstSample> {
  const rows = await sequelize.query<{ id: string; decision: string; seal: string; product_id: string; record: string }>(
    'SELECT id, decision, seal, product_id, record FROM verdicts WHERE id = $1 AND organisation_id = $2',
    { bind: [verdictId, organisationId], type: QueryTypes.SELECT },
  );
  const row = rows[0];
  if (!row) {
    throw new Refused('lot-not-judged', `no verdict ${verdictId} in your organisation`, [{ field: '/firstSampleVerdictId', detail: 'unknown verdict' }]);
  }
  if (row.decision !== 'second-sample-required') {
    throw new Conflict(`verdict ${row.id} is ${row.decision}; only a second-sample-required verdict takes a second sample`, 'not-awaiting-second-sample');
  }
  return { id: row.id, decision: row.decision, seal: row.seal, productId: row.product_id, record: JSON.parse(row.record) as VerdictRecord };
}

/**
 * The engine's input for a second sample: the first sample's spec and lot data, this sample's
 * measurements (and tares), and every earlier sample's values as the previous sample. A field the
 * submission repeats must agree with the first sample.
 */
export function secondSampleLot(first: FirstSample, sub: LotSubmission): { spec: ProductSpec; lot: LotData; lotCode: string } {
  const fl = first.record.input.lot;
  const mismatches: FieldIssue[] = [];
  const same = (field: 'lotSize' | 'testing' | 'measurementUnit' | 'measurementBasis', mine: unknown, theirs: unknown) => {
    if (mine !== undefined && theirs !== undefined && mine !== theirs) {
      mismatches.push({ field: `/${field}`, detail: `the first sample has ${field} ${JSON.stringify(theirs)}` });
    }
  };
  same('lotSize', sub.lotSize, fl.lotSize);
  same('testing', sub.testing, fl.testing);
  same('measurementUnit', sub.measurementUnit, fl.measurementUnit);
  same('measurementBasis', sub.measurementBasis, fl.measurementBasis);
  if (sub.lotCode !== undefined && sub.lotCode !== first.record.lot.lotCode) {
    mismatches.push({ field: '/lotCode', detail: `the first sample is of lot ${JSON.stringify(first.record.lot.lotCode)}` });
  }
  if (mismatches.length > 0) throw new Refused('lot-not-judged', 'a second sample must be of the same lot, measured the same way', mismatches);
  const lot: LotData = {
    lotSize: fl.lotSize,
    testing: fl.testing,
    measurementUnit: fl.measurementUnit,
    ...(fl.measurementBasis ? { measurementBasis: fl.measurementBasis } : {}),
    measurements: sub.measurements,
    ...(sub.tares ? { tares: sub.tares } : {}),
    ...(sub.tareSample ? { tareSample: sub.tareSample } : fl.tareSample ? { tareSample: fl.tareSample } : {}),
    previousSample: [...(fl.previousSample ?? []), ...fl.measurements],
    ...(fl.tares ? { previousTares: [...(fl.previousTares ?? []), ...fl.tares] } : {}),
  };
  return { spec: first.record.input.product, lot, lotCode: first.record.lot.lotCode };
}
