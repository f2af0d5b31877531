// Webhook signing secrets stored in clear by an earlier version are sealed at start, and a
// delivery still signs with the secret the receiver was given.
import { randomUUID } from 'node:crypto';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { WebhookEndpoint } from '../../server/models';
import { isSealed, secretBox } from '../../server/services/secret-box';
import { newWebhookSecret, openWebhookSecret, sealClearWebhookSecrets } from '../../server/services/webhooks';
import { buildTestApp, createTestOrganisation, type TestApp } from '../support/app';

let t: TestApp;
beforeAll(() => {
  t = buildTestApp();
});
afterAll(async () => {
  await t.close();
});

describe('webhook secrets from before sealing', () => {
  it('are sealed by the start-up pass, open to the same secret, and are left alone the second time', async () => {
    const org = await createTestOrganisation('Legacy hooks packer');
    const secret = newWebhookSecret();
    const id = randomUUID();
    await WebhookEndpoint.create({ id, organisationId: org.id, url: 'https://receiver.example/old', events: ['verdict.created'], description: '', enabled: true, secret });
    const box = secretBox(t.ctx.config);
    expect(await sealClearWebhookSecrets(t.ctx.db.sequelize, box)).toBeGreaterThanOrEqual(1);
    const stored = (await WebhookEndpoint.findByPk(id))!.secret;
    expect(isSealed(stored)).toBe(true);
    expect(stored).not.toContain(secret.slice('whsec_'.length));
    expect(openWebhookSecret(box, id, stored)).toBe(secret);
    expect(await sealClearWebhookSecrets(t.ctx.db.sequelize, box)).toBe(0);
    expect((await WebhookEndpoint.findByPk(id))!.secret).toBe(stored);
  });
});
