import type { Logger } from 'pino';
import type { Config } from '../config';
import type { Database } from '../db/database';

/** What handlers may use besides the request: configuration, the database handle, the logger. */
export interface AppContext {
  config: Config;
  db: Database;
  logger: Logger;
}

/** A route handler, keyed by the operationId it serves. */
export type Handler = (req: import('express').Request, res: import('express').Response) => unknown | Promise<unknown>;
export type Handlers = Record<string, Handler>;
