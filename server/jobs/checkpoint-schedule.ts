// Checkpoints on a schedule: every LOTPROOF_CHECKPOINT_INTERVAL_SECONDS, each organisation whose
// chain head has moved past its latest checkpoint gets a new one (server/ledger/checkpoints.ts).
// Every process may run it: issuing is serialised per organisation and issues nothing twice.
//
// Nothing here may reject unheard: a round's errors are caught and logged, and a database outage
// makes the loop wait for the next round and try again.
import type { Logger } from 'pino';
import type { Sequelize } from 'sequelize';
import type { Config } from '../config';
import { issueCheckpoint, organisationsBehind } from '../ledger/checkpoints';
import { installWitnessHook } from '../ledger/witnesses-outbox';

export interface CheckpointSchedule {
  /** Runs one round now (also what the timer does); never rejects. */
  runOnce: () => Promise<number>;
  stop: () => Promise<void>;
}

const describe = (err: unknown) => ({ message: String((err as Error)?.message ?? err).slice(0, 300) });

export function startCheckpointSchedule(deps: { sequelize: Sequelize; config: Config; logger: Logger }): CheckpointSchedule {
  const { sequelize, config, logger } = deps;
  // Scheduled checkpoints tell the witnesses too (the hook runs in each checkpoint's transaction).
  installWitnessHook();
  let stopped = false;
  let round: Promise<number> | null = null;

  const issueAll = async (): Promise<number> => {
    let issued = 0;
    for (const organisationId of await organisationsBehind(sequelize)) {
      if (stopped) break;
      try {
        if ((await issueCheckpoint(sequelize, config, organisationId))?.created) issued++;
      } catch (err) {
        // One organisation's failure (a gap in its chain) does not hold up the others.
        logger.warn({ err: describe(err), organisationId }, 'checkpoint not issued; will retry');
      }
    }
    return issued;
  };
  const runOnce = (): Promise<number> => {
    if (stopped) return Promise.resolve(0);
    round ??= issueAll()
      .catch((err) => {
        logger.warn({ err: describe(err) }, 'checkpoint round failed; will retry');
        return 0;
      })
      .finally(() => {
        round = null;
      });
    return round;
  };
  const timer = setInterval(() => void runOnce(), config.verdicts.checkpointIntervalSeconds * 1000);
  timer.unref();
  return {
    runOnce,
    stop: async () => {
      stopped = true;
      clearInterval(timer);
      await round;
    },
  };
}
