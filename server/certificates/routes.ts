// Certificates: a verdict as a PDF. Thin: read the validated request, call one function of the
// area, send the reply.
import type { AppContext, Handlers } from '../http/context';
import { certificateData } from './certificate-data';
import { renderCertificate } from './certificate-pdf';

/** A file name from a lot code: letters, digits, dot, dash and underscore only. */
const safe = (s: string) => s.replace(/[^A-Za-z0-9._-]+/g, '-').slice(0, 60) || 'lot';

export function certificateHandlers(ctx: AppContext): Handlers {
  const sequelize = ctx.db.sequelize;
  return {
    getVerdictCertificate: async (req, res) => {
      const data = await certificateData(sequelize, req.principal!, String(req.params.verdictId), ctx.config.publicUrl);
      const pdf = await renderCertificate(data);
      res.status(200).type('application/pdf');
      res.setHeader('Content-Disposition', `attachment; filename="lotproof-certificate-${safe(data.verdict.lot.lotCode)}-${data.verdict.seal.value.slice(0, 10)}.pdf"`);
      res.setHeader('Cache-Control', 'private, no-store');
      res.send(pdf);
    },
  };
}
