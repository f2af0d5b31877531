// Webhook signing secrets stored in clear by an earlier version are sealed at start, and a
// delivery still signs with the secret the receiver was given.
import { randomUUID } from 'node:crypto';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { WebhookEndpoint } from '../../server/models';
import { isSealed, secretBox } from '../../server/core/secret-box';
import { randomBytes } from 'node:crypto';
import { QueryTypes } from 'sequelize';
import pg from 'pg';
import { deliverWebhook } from '../../server/jobs/webhook-delivery';
import { newWebhookSecret, openWebhookSecret, resealWebhookSecrets, sendTestWebhook } from '../../server/webhooks/endpoints';
import { buildTestApp, createTestOrganisation, testDatabaseUrl, type TestApp } from '../support/app';

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
    expect((await resealWebhookSecrets(t.ctx.db.sequelize, box)).resealed).toBeGreaterThanOrEqual(1);
    const stored = (await WebhookEndpoint.findByPk(id))!.secret;
    expect(isSealed(stored)).toBe(true);
    expect(stored).not.toContain(secret.slice('whsec_'.length));
    expect(openWebhookSecret(box, id, stored)).toBe(secret);
    expect((await resealWebhookSecrets(t.ctx.db.sequelize, box)).resealed).toBe(0);
    expect((await WebhookEndpoint.findByPk(id))!.secret).toBe(stored);
  });

  it('are not opened under another secrets key: the attempt says why, and nothing is sent', async () => {
    const org = await createTestOrganisation('Other key packer');
    const id = randomUUID();
    const box = secretBox(t.ctx.config);
    await WebhookEndpoint.create({ id, organisationId: org.id, url: 'https://receiver.example/new', events: ['verdict.created'], description: '', enabled: true, secret: box.seal(newWebhookSecret(), `webhook-secret:${id}`) });
    const principal = { organisationId: org.id, kind: 'api-key' as const, scopes: ['webhooks:manage' as const] };
    const delivery = await sendTestWebhook(t.ctx.db.sequelize, principal as never, id);
    const otherServer = { ...t.ctx.config, secretsKey: randomBytes(32) };
    const jobPool = new pg.Pool({ connectionString: testDatabaseUrl(), max: 1 });
    try {
      const outcome = await deliverWebhook({ db: jobPool, config: otherServer, logger: t.ctx.logger, secrets: secretBox(otherServer) }, delivery.id);
      expect(outcome).toMatchObject({ status: 'pending', statusCode: null, error: expect.stringMatching(/LOTPROOF_SECRETS_KEY/) });
    } finally {
      await jobPool.end();
    }
    const attempts = await t.ctx.db.sequelize.query<{ error: string; status_code: number | null }>('SELECT error, status_code FROM webhook_attempts WHERE delivery_id = $1', { bind: [delivery.id], type: QueryTypes.SELECT });
    expect(attempts).toHaveLength(1);
    expect(attempts[0]!.error).toMatch(/LOTPROOF_SECRETS_KEY/);
    expect(attempts[0]!.status_code).toBeNull();
  });
});
