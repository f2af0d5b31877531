// The verdict page's recomputation panel: a reproduced result, and one that is not (which the
// real engine cannot be made to produce on purpose, so the server's answer is given as data).
import { describe, expect, it } from 'vitest';
import { mount } from '@vue/test-utils';
import RecomputeResult from '../../console/src/components/RecomputeResult.vue';

const base = {
  verdictId: '0f1e2d3c-4b5a-4978-8695-a4b3c2d1e0f9',
  recordedEngineVersion: '1.0.0',
  currentEngineVersion: '1.0.0',
  recordedDecision: 'conforming' as const,
};

describe('RecomputeResult', () => {
  it('says the stored result was reproduced field for field', () => {
    const w = mount(RecomputeResult, { props: { recomputation: { ...base, matches: true, recomputedDecision: 'conforming', differences: [] } } });
    expect(w.find('[data-recompute-result="match"]').text()).toMatch(/Reproduced exactly: engine 1\.0\.0 .*\(conforming\)/);
    expect(w.find('[data-recompute-result="differs"]').exists()).toBe(false);
  });

  it('names both engine versions and decisions and lists where the results differ', () => {
    const w = mount(RecomputeResult, {
      props: {
        recomputation: {
          ...base, currentEngineVersion: '1.1.0', matches: false, recomputedDecision: 'nonconforming',
          differences: ['/decision', '/criteria/1/limit'],
        },
      },
    });
    const panel = w.find('[data-recompute-result="differs"]');
    expect(panel.text()).toMatch(/Not reproduced: the stored result \(engine 1\.0\.0, conforming\)\s+differs from engine 1\.1\.0’s \(nonconforming\)/);
    expect(panel.findAll('li').map((li) => li.text())).toEqual(['/decision', '/criteria/1/limit']);
    expect(w.find('[data-recompute-result="match"]').exists()).toBe(false);
  });

  it('says when the current engine gives no result at all', () => {
    const w = mount(RecomputeResult, { props: { recomputation: { ...base, matches: false, recomputedDecision: null, differences: [] } } });
    expect(w.text()).toMatch(/\(no result\)/);
    expect(w.findAll('li')).toHaveLength(0);
  });
});
