import type { Migration } from '../db/migrate';

// Verdicts and the ledger: products (the spec a lot is judged against), the append-only verdict
// rows that form each organisation's hash chain, idempotency records, the public signing keys,
// webhook endpoints with their delivery log, and the outbox of alert e-mails.
export const up: Migration = async ({ context: qi }) => {
  await qi.sequelize.query(`
    CREATE TABLE products (
      id uuid PRIMARY KEY DEFAULT gen_random_uuid(),
      organisation_id uuid NOT NULL REFERENCES organisations(id),
      sku text NOT NULL CHECK (length(sku) BETWEEN 1 AND 64),
      name text NOT NULL CHECK (length(name) BETWEEN 1 AND 200),
      description text NOT NULL DEFAULT '',
      nominal_quantity double precision NOT NULL CHECK (nominal_quantity > 0),
      unit text NOT NULL,
      tare_mode text NOT NULL CHECK (tare_mode IN ('none', 'fixed', 'per-pack', 'sample')),
      fixed_tare double precision CHECK (fixed_tare >= 0),
      tare_unit text,
      density double precision CHECK (density > 0),
      rulebook jsonb NOT NULL,
      alert_recipients text[] NOT NULL DEFAULT '{}',
      created_at timestamptz NOT NULL DEFAULT now(),
      updated_at timestamptz NOT NULL DEFAULT now(),
      archived_at timestamptz
    );
    CREATE UNIQUE INDEX products_sku ON products (organisation_id, sku) WHERE archived_at IS NULL;
    CREATE INDEX products_organisation ON products (organisation_id, created_at DESC, id DESC);

    -- One row per verdict. "record" is the RFC 8785 canonical JSON that was hashed (seal) and signed;
    -- the other columns are copies of fields of that record for filtering and display.
    CREATE TABLE verdicts (
      id uuid PRIMARY KEY,
      organisation_id uuid NOT NULL REFERENCES organisations(id),
      sequence bigint NOT NULL CHECK (sequence >= 1),
      seal text NOT NULL UNIQUE CHECK (seal ~ '^[0-9a-f]{64}$'),
      previous_seal text CHECK (previous_seal ~ '^[0-9a-f]{64}$'),
      signature text NOT NULL,
      kid text NOT NULL,
      record text NOT NULL,
      product_id uuid NOT NULL REFERENCES products(id),
      product_sku text NOT NULL,
      product_name text NOT NULL,
      product_spec json NOT NULL,
      lot_code text NOT NULL,
      line text,
      packed_at timestamptz,
      lot_size integer NOT NULL,
      testing text NOT NULL,
      measurement_unit text NOT NULL,
      measurement_count integer NOT NULL,
      client_reference text,
      source_format text NOT NULL,
      first_sample_verdict_id uuid REFERENCES verdicts(id),
      decision text NOT NULL CHECK (decision IN ('conforming', 'nonconforming', 'second-sample-required', 'insufficient-data')),
      result json NOT NULL,
      engine_version text NOT NULL,
      rulebook_id text NOT NULL,
      rulebook_version text NOT NULL,
      recorded_at timestamptz NOT NULL,
      UNIQUE (organisation_id, sequence),
      CHECK ((sequence = 1) = (previous_seal IS NULL))
    );
    -- Big records (a lot of a million measurements is ~10 MB) are stored out of line uncompressed:
    -- compressing them would cost more time than it saves.
    ALTER TABLE verdicts ALTER COLUMN record SET STORAGE EXTERNAL;
    CREATE UNIQUE INDEX verdicts_one_second_sample ON verdicts (first_sample_verdict_id) WHERE first_sample_verdict_id IS NOT NULL;
    CREATE INDEX verdicts_product ON verdicts (organisation_id, product_id, sequence DESC);
    CREATE INDEX verdicts_lot_code ON verdicts (organisation_id, lot_code);
    CREATE INDEX verdicts_recorded ON verdicts (organisation_id, recorded_at DESC);

    CREATE FUNCTION lotproof_append_only() RETURNS trigger LANGUAGE plpgsql AS $fn$
    BEGIN
      RAISE EXCEPTION 'table % is append-only: % is not allowed', TG_TABLE_NAME, TG_OP
        USING ERRCODE = 'insufficient_privilege', HINT = 'A verdict is corrected by submitting a new lot, never by changing a sealed one.';
    END
    $fn$;
    CREATE TRIGGER verdicts_append_only BEFORE UPDATE OR DELETE ON verdicts
      FOR EACH ROW EXECUTE FUNCTION lotproof_append_only();
    CREATE TRIGGER verdicts_no_truncate BEFORE TRUNCATE ON verdicts
      FOR EACH STATEMENT EXECUTE FUNCTION lotproof_append_only();

    CREATE TABLE idempotency_records (
      organisation_id uuid NOT NULL REFERENCES organisations(id),
      operation text NOT NULL,
      key text NOT NULL,
      request_hash text NOT NULL,
      status integer NOT NULL,
      response text NOT NULL,
      resource_id uuid,
      created_at timestamptz NOT NULL DEFAULT now(),
      PRIMARY KEY (organisation_id, operation, key)
    );

    CREATE TABLE signing_keys (
      kid text PRIMARY KEY,
      public_jwk jsonb NOT NULL,
      created_at timestamptz NOT NULL DEFAULT now()
    );

    CREATE TABLE webhook_endpoints (
      id uuid PRIMARY KEY DEFAULT gen_random_uuid(),
      organisation_id uuid NOT NULL REFERENCES organisations(id),
      url text NOT NULL CHECK (url ~ '^https?://'),
      description text NOT NULL DEFAULT '',
      events text[] NOT NULL CHECK (cardinality(events) > 0),
      -- Standard Webhooks signing secret ("whsec_…"); needed in clear to sign, shown to the admin once
      secret text NOT NULL,
      enabled boolean NOT NULL DEFAULT true,
      created_at timestamptz NOT NULL DEFAULT now(),
      updated_at timestamptz NOT NULL DEFAULT now(),
      deleted_at timestamptz
    );
    CREATE INDEX webhook_endpoints_organisation ON webhook_endpoints (organisation_id) WHERE deleted_at IS NULL;

    -- The webhook outbox and delivery log: written in the verdict's own transaction, handed to the
    -- job queue by the drain (enqueued_at), updated by the delivery job.
    CREATE TABLE webhook_deliveries (
      id uuid PRIMARY KEY,
      organisation_id uuid NOT NULL REFERENCES organisations(id),
      endpoint_id uuid NOT NULL REFERENCES webhook_endpoints(id),
      verdict_id uuid REFERENCES verdicts(id),
      event_type text NOT NULL,
      payload text NOT NULL,
      status text NOT NULL DEFAULT 'pending' CHECK (status IN ('pending', 'delivered', 'failed')),
      attempts integer NOT NULL DEFAULT 0,
      last_status_code integer,
      created_at timestamptz NOT NULL DEFAULT now(),
      enqueued_at timestamptz,
      delivered_at timestamptz,
      UNIQUE (endpoint_id, verdict_id, event_type)
    );
    CREATE INDEX webhook_deliveries_endpoint ON webhook_deliveries (endpoint_id, created_at DESC);
    CREATE INDEX webhook_deliveries_unqueued ON webhook_deliveries (created_at) WHERE enqueued_at IS NULL;

    CREATE TABLE webhook_attempts (
      id bigserial PRIMARY KEY,
      delivery_id uuid NOT NULL REFERENCES webhook_deliveries(id),
      attempt integer NOT NULL,
      attempted_at timestamptz NOT NULL DEFAULT now(),
      status_code integer,
      error text,
      duration_ms integer NOT NULL
    );
    CREATE INDEX webhook_attempts_delivery ON webhook_attempts (delivery_id, attempt);

    CREATE TABLE alert_emails (
      id uuid PRIMARY KEY,
      organisation_id uuid NOT NULL REFERENCES organisations(id),
      verdict_id uuid NOT NULL REFERENCES verdicts(id),
      recipients text[] NOT NULL,
      subject text NOT NULL,
      body text NOT NULL,
      created_at timestamptz NOT NULL DEFAULT now(),
      enqueued_at timestamptz,
      sent_at timestamptz
    );
    CREATE INDEX alert_emails_unqueued ON alert_emails (created_at) WHERE enqueued_at IS NULL;
  `);
};

export const down: Migration = async ({ context: qi }) => {
  await qi.sequelize.query(`
    DROP TABLE alert_emails, webhook_attempts, webhook_deliveries, webhook_endpoints, signing_keys, idempotency_records;
    DROP TABLE verdicts; DROP FUNCTION lotproof_append_only(); DROP TABLE products;
  `);
};
