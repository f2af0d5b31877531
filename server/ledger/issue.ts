// Issuing a checkpoint for a reader (a check, a walk, an export): bring it up to the chain's head,
// or, when the chain cannot be built further (a missing position), say so and use the latest.
import type { Sequelize } from 'sequelize';
import type { Config } from '../config';
import { Conflict } from '../core/errors';
import { issueCheckpoint, latestCheckpoint, type CheckpointHook, type Issued } from './checkpoints';
import { ChainGap } from './tree-store';

/** The latest checkpoint after issuing one if the chain has grown; `problem` says why it could not. */
export async function ensureCheckpoint(
  sequelize: Sequelize,
  config: Pick<Config, 'dataDir' | 'verdicts'>,
  organisationId: string,
): Promise<{ checkpoint: Awaited<ReturnType<typeof latestCheckpoint>>; problem: string | null }> {
  try {
    const issued = await issueCheckpoint(sequelize, config, organisationId);
    return { checkpoint: issued?.checkpoint ?? null, problem: null };
  } catch (err) {
    if (!(err instanceof ChainGap)) throw err;
    return { checkpoint: await latestCheckpoint(sequelize, organisationId), problem: `no checkpoint can cover the head of the chain: ${err.message}` };
  }
}

/** POST /v1/ledger/checkpoints: a gap in the chain is a 409, not a server error. */
export async function issueOnDemand(
  sequelize: Sequelize,
  config: Pick<Config, 'dataDir' | 'verdicts'>,
  organisationId: string,
  options: { inTransaction?: CheckpointHook } = {},
): Promise<Issued | null> {
  try {
    return await issueCheckpoint(sequelize, config, organisationId, options);
  } catch (err) {
    if (err instanceof ChainGap) throw new Conflict(`the ledger cannot be checkpointed: ${err.message}`, 'ledger-gap');
    throw err;
  }
}
