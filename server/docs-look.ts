// The interactive API docs in Lotproof's own look: our name, our colours (the console's tokens in
// console/src/assets/main.css), the Inter font and our favicon served from this server, the stock
// tool's top bar (its logo and outbound links) hidden and its online validator off, so the page
// loads and links nothing from another host.
import express, { type Express } from 'express';
import { createRequire } from 'node:module';
import { dirname, join } from 'node:path';
import { fileURLToPath } from 'node:url';
import type { SwaggerUiOptions } from 'swagger-ui-express';
import { NotFoundProblem } from './http/problem';

const root = join(dirname(fileURLToPath(import.meta.url)), '..');
const INTER_FILES = join(dirname(createRequire(import.meta.url).resolve('@fontsource/inter/package.json')), 'files');
export const DOCS_ASSETS = '/docs-assets';

const font = (weight: number) =>
  `@font-face{font-family:"Inter";font-style:normal;font-weight:${weight};font-display:swap;src:url("${DOCS_ASSETS}/fonts/inter-latin-${weight}-normal.woff2") format("woff2")}`;

const CSS = [
  font(400),
  font(600),
  font(700),
  '.swagger-ui .topbar{display:none}',
  'body{background:#f7f5f0;margin:0}',
  '.swagger-ui,.swagger-ui .info .title,.swagger-ui .info p,.swagger-ui .opblock-tag,.swagger-ui .opblock .opblock-summary-description,.swagger-ui .btn,.swagger-ui table thead tr td,.swagger-ui table thead tr th,.swagger-ui .parameter__name,.swagger-ui .response-col_status,.swagger-ui .tab li,.swagger-ui .model-title,.swagger-ui label,.swagger-ui select,.swagger-ui input{font-family:"Inter",ui-sans-serif,system-ui,sans-serif}',
  '.swagger-ui{color:#1d2a2e}',
  '.swagger-ui .info{margin:32px 0 24px}',
  '.swagger-ui .info hgroup.main::before{content:"Lotproof";display:block;margin-bottom:6px;font:600 12px/1 "Inter",sans-serif;letter-spacing:.12em;text-transform:uppercase;color:#b8692e}',
  '.swagger-ui .info .title{color:#143f43}',
  '.swagger-ui .info a,.swagger-ui .info__license,.swagger-ui .info__tos,.swagger-ui .info__contact,.swagger-ui .info__extdocs{color:#1f5d63}',
  '.swagger-ui .info__tos,.swagger-ui .info__contact,.swagger-ui .info__extdocs,.swagger-ui .info a[href^="http"]{display:none}',
  '.swagger-ui .scheme-container{background:#fff;box-shadow:none;border-top:4px solid #b8692e;border-bottom:1px solid #dcd7cc}',
  '.swagger-ui .btn.authorize{color:#1f5d63;border-color:#1f5d63}',
  '.swagger-ui .btn.authorize svg{fill:#1f5d63}',
  '.swagger-ui .btn.execute{background:#1f5d63;border-color:#1f5d63;color:#fff}',
  '.swagger-ui .opblock-tag{border-bottom-color:#dcd7cc;color:#1d2a2e}',
  '.swagger-ui a.nostyle,.swagger-ui .opblock-tag a{color:inherit}',
  '.swagger-ui .opblock{border-radius:6px;box-shadow:none}',
].join('\n');

/** Static files the docs page needs: the font files and the favicon, from this server. */
export function serveDocsAssets(app: Express): void {
  app.use(`${DOCS_ASSETS}/fonts`, express.static(INTER_FILES, { index: false, maxAge: '7d' }));
  app.get(`${DOCS_ASSETS}/favicon.svg`, (_req, res) => {
    res.sendFile(join(root, 'console', 'public', 'favicon.svg'), { maxAge: '7d' });
  });
  // Anything else under it is a 404 problem, not the console's page.
  app.use(DOCS_ASSETS, (_req, _res, next) => next(new NotFoundProblem('There is no such file of the API docs.')));
}

/** swagger-ui-express's options for our look (the caller adds its own swaggerOptions). */
export const DOCS_LOOK: Pick<SwaggerUiOptions, 'customSiteTitle' | 'customCss' | 'customfavIcon'> = {
  customSiteTitle: 'Lotproof API',
  customCss: CSS,
  customfavIcon: `${DOCS_ASSETS}/favicon.svg`,
};
