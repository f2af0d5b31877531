/**
 * Lots judged by engine 1.1.2 (the engine before issue 17), whose verdicts are kept in
 * engine-1.1.2-verdicts.json as that engine sealed them: the frozen copy of that engine
 * (shared/engine/legacy/engine-1-1-2) must give them back byte for byte, so that a record sealed
 * with it still recomputes as sealed. The verdicts were written once, by running this file's
 * `main` against the engine as of commit b59be04, before any change of issue 17.
 */
import type { LotInput } from '../../../shared/engine';
import { ramp, shuffled, withPacksAt } from '../helpers';

function lot(product: Partial<LotInput['product']>, l: Partial<LotInput['lot']>): LotInput {
  return {
    product: { nominalQuantity: 500, unit: 'g', tareMode: 'none', rulebook: { id: 'eu-76-211' }, ...product },
    lot: { lotSize: 400, testing: 'non-destructive', measurementUnit: 'g', measurements: [], ...l },
  };
}

export const ENGINE_1_1_2_CASES: Record<string, LotInput> = {
  'eu first sample of 30, one below T1': lot({}, { measurements: withPacksAt(30, 502, 1, 484, 7) }),
  'eu first sample of 30, two below T1 (second sample)': lot({}, { measurements: withPacksAt(30, 502, 2, 484, 7) }),
  'eu second sample': lot({}, { previousSample: withPacksAt(30, 502, 2, 484, 7), measurements: shuffled(ramp(30, 501, 2)) }),
  'eu lot 2000 n 50': lot({}, { lotSize: 2000, measurements: shuffled(ramp(50, 500.5, 4)) }),
  'eu destructive n 20': lot({}, { lotSize: 900, testing: 'destructive', measurements: shuffled(ramp(20, 501, 3)) }),
  'eu single plan n 50': lot({ rulebook: { id: 'eu-76-211', params: { nonDestructivePlan: 'single' } } }, { measurements: withPacksAt(50, 501, 3, 484, 9) }),
  'eu lot 60 checked in full, 3 below T1': lot({}, { lotSize: 60, measurements: withPacksAt(60, 503, 3, 484, 11) }),
  'eu lot 120 checked in full': lot({}, { lotSize: 120, measurements: withPacksAt(120, 503, 3, 484, 11) }),
  'eu tare sample with a wide spread': lot(
    { tareMode: 'sample' },
    { measurements: shuffled(ramp(30, 532, 3)), tareSample: [20, 40, 25, 38, 31, 29] },
  ),
  'eu in ounces': lot({ nominalQuantity: 16, unit: 'oz' }, { measurementUnit: 'g', measurements: shuffled(ramp(30, 455, 3)) }),
  'oiml 1500 g': lot({ nominalQuantity: 1500, rulebook: { id: 'oiml-r87-2016' } }, { lotSize: 300, measurements: shuffled(ramp(50, 1502, 6)) }),
  'oiml lot 8 in full': lot({ rulebook: { id: 'oiml-r87-2016' } }, { lotSize: 8, measurements: ramp(8, 501, 2) }),
  'oiml lot 60 n 13': lot({ rulebook: { id: 'oiml-r87-2016' } }, { lotSize: 60, measurements: withPacksAt(13, 501, 1, 484, 5) }),
  'oiml 20 kg': lot({ nominalQuantity: 20, unit: 'kg', rulebook: { id: 'oiml-r87-2016' } }, { lotSize: 4000, measurementUnit: 'kg', measurements: shuffled(ramp(125, 20.02, 0.05)) }),
  'custom with limits': lot(
    { rulebook: { id: 'custom', params: { alpha: 0.01, lowerLimit: { value: 490, allowed: 1 }, upperLimit: { value: 520, allowed: 0 } } } },
    { measurements: shuffled(ramp(25, 501, 5)) },
  ),
};
