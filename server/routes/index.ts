// All route handlers, keyed by operationId. Each area of the API owns one module and adds one line.
import type { AppContext, Handlers } from '../http/context';
import { systemHandlers } from './system';
import { identityHandlers } from './identity';
import { verdictHandlers } from './verdicts';

export function allHandlers(ctx: AppContext): Handlers {
  const areas: Handlers[] = [systemHandlers(ctx), identityHandlers(ctx), verdictHandlers(ctx)];
  const all: Handlers = {};
  for (const area of areas) {
    for (const [id, h] of Object.entries(area)) {
      if (id in all) throw new Error(`handler ${id} is defined twice`);
      all[id] = h;
    }
  }
  return all;
}
