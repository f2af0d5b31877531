// The verdict detail's Recompute action: the server re-runs the recorded engine on the stored input
// and the page says, in words and with a mark, whether the stored result was reproduced exactly.
import { beforeAll, describe, expect, it } from 'vitest';
import { issueApiKey } from '../../server/identity/api-key-store';
import { screenshot, seedProduct, signIn, useHarness } from './support';
import { measurements } from '../support/lots';

const h = useHarness('recompute');
let verdictId: string;
beforeAll(async () => {
  const product = await seedProduct(h, { tareMode: 'none', fixedTare: null });
  const { secret } = await issueApiKey({ organisationId: h.organisationId, name: 'recompute test', scopes: ['lots:submit'] });
  const res = await fetch(`${h.baseUrl}/v1/lots`, {
    method: 'POST',
    headers: { Authorization: `Bearer ${secret}`, 'Content-Type': 'application/json' },
    body: JSON.stringify({
      sku: product.sku,
      lotCode: 'L-RECOMPUTE-1',
      lotSize: 2000,
      testing: 'non-destructive',
      measurementUnit: 'g',
      measurementBasis: 'net',
      measurements: measurements(7, 50, 503, 2),
    }),
  });
  const body = await res.json();
  if (res.status !== 201) throw new Error(`lot: ${res.status} ${JSON.stringify(body)}`);
  verdictId = body.id;
});

describe('recomputing a verdict', () => {
  it('shows that the stored result is reproduced exactly', async () => {
    const { page } = await h.open();
    await signIn(page, h.users.auditor);
    await page.goto(`/verdicts/${verdictId}`);
    const panel = page.locator('[data-recompute]');
    await panel.getByRole('button', { name: 'Recompute' }).click();
    const result = panel.locator('[data-recompute-result]');
    await result.waitFor();
    expect(await result.getAttribute('data-recompute-result')).toBe('match');
    expect(await result.innerText()).toMatch(/Reproduced exactly/);
    await screenshot(page, '52-verdict-recomputed');
  });
});
