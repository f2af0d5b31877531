// The practical ceiling of this stack for bench:api: Express parses the JSON body and pg inserts
// one row. No auth, no validation, no engine, no ledger.
import express from 'express';
import pg from 'pg';

const pool = new pg.Pool({ connectionString: process.env.DATABASE_URL, max: 20 });
pool.on('error', () => {});
await pool.query('CREATE TABLE IF NOT EXISTS bench_bare (id bigserial PRIMARY KEY, body jsonb NOT NULL, created_at timestamptz NOT NULL DEFAULT now())');
const app = express();
app.use(express.json({ limit: '50mb' }));
app.post('/bare', async (req, res) => {
  const { rows } = await pool.query('INSERT INTO bench_bare (body) VALUES ($1) RETURNING id', [JSON.stringify(req.body)]);
  res.status(201).json({ id: rows[0].id });
});
const server = app.listen(Number(process.env.PORT), '127.0.0.1', () => console.log('ready'));
process.on('SIGTERM', () => server.close(() => pool.end().then(() => process.exit(0))));
