// Metering handlers: the usage report. Thin: read the validated request, call one function of the area.
import type { AppContext, Handlers } from '../http/context';
import { readUsage } from './usage';

export function meteringHandlers(_ctx: AppContext): Handlers {
  return {
    getUsage: async (req, res) => {
      const s = (k: string) => (typeof req.query[k] === 'string' ? (req.query[k] as string) : undefined);
      res.json(await readUsage(req.principal!.organisationId, { from: s('from'), to: s('to'), keyId: s('keyId') }));
    },
  };
}
