// A verdict's certificate as a PDF (A4): drawn with pdfkit (a maintained PDF library) in the Inter
// font the console uses (its Latin .woff files from @fontsource/inter, which pdfkit embeds and
// subsets), a QR code from the `qrcode` package drawn as vector squares, and a histogram of the net
// quantities drawn with pdfkit's vector operations. The words and figures are the console's own:
// the release sentence (console/src/lib/releaseDecision.ts) and the formats (console/src/lib/format.ts,
// at the verdict's precision), both pure modules, so a certificate and the verdict page agree.
import { createRequire } from 'node:module';
import PDFDocument from 'pdfkit';
import QRCode from 'qrcode';
import type { Verdict as EngineVerdict } from '../../shared/engine/types';
import { createFormats, localiseEngineText, shortSeal, verdictQuantities, type Formats } from '../../console/src/lib/format';
import { releaseDecisions, type ReleaseAction } from '../../console/src/lib/releaseDecision';
import { axisRange, histogramBins } from '../../console/src/lib/histogram';
import type { CertificateData } from './certificate-data';

const require = createRequire(import.meta.url);
const FONT_REGULAR = require.resolve('@fontsource/inter/files/inter-latin-400-normal.woff');
const FONT_BOLD = require.resolve('@fontsource/inter/files/inter-latin-600-normal.woff');

// The console's colours (console/src/lib/charts.ts COLORS), as a print would show them.
const INK = '#1d2a2e';
const INK_SOFT = '#51616a';
const LINE = '#dcd7cc';
const BRAND = '#1f5d63';
const ACCENT = '#b8692e';
const FAIL = '#a3322a';
const HOLD = '#7f6210';
const ACTION_COLOUR: Record<ReleaseAction, string> = { release: BRAND, hold: FAIL, 'sample-more': HOLD, 'no-decision': INK_SOFT };
const DECISION_WORDS = { conforming: 'Conforming', nonconforming: 'Nonconforming', 'second-sample-required': 'Second sample required', 'insufficient-data': 'Insufficient data' } as const;
const CRITERION_MARK = (passed: boolean | null) => (passed === true ? 'Met' : passed === false ? 'Not met' : 'Open');

const PAGE = { width: 595.28, height: 841.89, margin: 48 };
const WIDTH = PAGE.width - 2 * PAGE.margin;

// The embedded font is Inter's Latin subset (U+0000–00FF, U+2000–206F, U+2212 …, per the package's
// unicode.json); the few symbols of the engine's sentences outside it are written in letters.
const OUTSIDE_LATIN: Record<string, string> = { 'α': 'alpha', 'μ': 'mu', 'ν': 'df', '₀': '0', '₁': '1', '≤': '<=', '≥': '>=', '·': '·', '≈': '~', '√': 'sqrt' };
const LATIN = /[\u0000-\u00ff\u0131\u0152\u0153\u02bb\u02bc\u02c6\u02da\u02dc\u2000-\u206f\u20ac\u2122\u2191\u2193\u2212\u2215]/u;

/** Text the embedded font can show: known symbols in letters, accents taken off, anything else as "?". */
export function printable(text: string): string {
  let out = '';
  for (const ch of text) {
    if (LATIN.test(ch)) out += ch;
    else if (OUTSIDE_LATIN[ch]) out += OUTSIDE_LATIN[ch];
    else {
      const base = ch.normalize('NFKD').replace(/[\u0300-\u036f]/g, '');
      out += [...base].every((c) => LATIN.test(c)) ? base : '?';
    }
  }
  return out;
}

/** An instant as a document states it: UTC, to the minute. */
function utc(iso: string | null | undefined): string {
  if (!iso) return '—';
  const d = new Date(iso);
  return Number.isNaN(d.getTime()) ? iso : `${d.toISOString().slice(0, 16).replace('T', ' ')} UTC`;
}

type Doc = PDFKit.PDFDocument;

/** A section heading, on a new page when the section's first `keep` points would not follow it on this one. */
function heading(doc: Doc, text: string, keep = 40): void {
  ensureRoom(doc, keep + 24);
  doc.moveDown(0.6).font('Inter-Bold').fontSize(11).fillColor(INK).text(printable(text), PAGE.margin, doc.y, { width: WIDTH });
  doc.moveDown(0.25);
}

function ensureRoom(doc: Doc, height: number): void {
  if (doc.y + height > PAGE.height - PAGE.margin - 24) doc.addPage();
}

/** A row of `facts`: label, value, and for a code (a seal, a signature) a smaller size that keeps it on one line. */
type Fact = [label: string, value: string, size?: number];

/** Label–value rows in two columns, at `left` and `width` (the whole text width by default). */
function facts(doc: Doc, rows: Fact[], labelWidth = 150, left = PAGE.margin, width = WIDTH): void {
  for (const [label, value, size = 9] of rows) {
    const text = printable(value);
    // A code is one unbroken line (no break at its "-" or "_"): a reader copies it whole.
    const options = size < 9 ? { width: width - labelWidth, lineBreak: false } : { width: width - labelWidth };
    const h = Math.max(doc.font('Inter').fontSize(size).heightOfString(text, options), 11);
    ensureRoom(doc, h + 2);
    const y = doc.y;
    doc.font('Inter').fontSize(9).fillColor(INK_SOFT).text(printable(label), left, y, { width: labelWidth - 8 });
    doc.font('Inter').fontSize(size).fillColor(INK).text(text, left + labelWidth, y + (size < 9 ? 1 : 0), options);
    doc.y = y + h + 2;
  }
}

/** The net quantities as a histogram with Qn, T1 and T2 marked, drawn with vector operations. */
function histogram(doc: Doc, values: number[], v: EngineVerdict, fmt: Formats): void {
  const n = v.net;
  const q = verdictQuantities(n);
  const height = 150;
  ensureRoom(doc, height + 40);
  const top = doc.y + 4;
  const left = PAGE.margin + 30;
  const width = WIDTH - 40;
  const bins = histogramBins(values);
  const refs: Array<[string, number | null, string]> = [
    ['Qn', n.nominalQuantity, BRAND],
    ['T1', n.t1Limit, ACCENT],
    ['T2', n.t2Limit, FAIL],
  ];
  const range = axisRange(values, refs.map((r) => r[1]));
  const x = (value: number) => left + ((value - range.min) / (range.max - range.min)) * width;
  const maxCount = Math.max(1, ...bins.map((b) => b.count));
  const y = (count: number) => top + height - (count / maxCount) * (height - 14);
  // axes
  doc.lineWidth(0.6).strokeColor(INK_SOFT).moveTo(left, top + height).lineTo(left + width, top + height).stroke();
  doc.moveTo(left, top).lineTo(left, top + height).stroke();
  doc.font('Inter').fontSize(7).fillColor(INK_SOFT);
  doc.text(fmt.count(maxCount), PAGE.margin, y(maxCount) - 3, { width: 26, align: 'right' });
  doc.text('0', PAGE.margin, top + height - 4, { width: 26, align: 'right' });
  // bars: below T1 in copper, as on the verdict page
  for (const b of bins) {
    const x0 = x(b.from);
    const x1 = x(b.to);
    if (b.count === 0) continue;
    const below = n.t1Limit !== null && b.to <= n.t1Limit;
    doc.rect(x0 + 0.4, y(b.count), Math.max(0.8, x1 - x0 - 0.8), top + height - y(b.count)).fillColor(below ? ACCENT : BRAND).fillOpacity(below ? 0.5 : 0.55).fill();
  }
  doc.fillOpacity(1);
  // reference lines with their labels
  for (const [label, value, colour] of refs) {
    if (value === null) continue;
    const xv = x(value);
    doc.lineWidth(0.9).strokeColor(colour).dash(3, { space: 2 }).moveTo(xv, top).lineTo(xv, top + height).stroke().undash();
    doc.font('Inter').fontSize(7).fillColor(colour).text(`${label} ${fmt.quantity(value, q.unit, q)}`, xv + 2, top + 1, { lineBreak: false });
  }
  // the axis' ends
  doc.font('Inter').fontSize(7).fillColor(INK_SOFT);
  doc.text(fmt.quantity(range.min, q.unit, q), left, top + height + 3, { lineBreak: false });
  const end = fmt.quantity(range.max, q.unit, q);
  doc.text(end, left + width - doc.widthOfString(end), top + height + 3, { lineBreak: false });
  doc.x = PAGE.margin;
  doc.y = top + height + 16;
  doc.font('Inter').fontSize(8).fillColor(INK_SOFT).text(`Net contents of the ${fmt.count(values.length)} packs judged; bars below T1 (Qn − TNE) in copper.`, PAGE.margin, doc.y, { width: WIDTH });
}

/** The QR code of `url`, drawn as vector squares (one per dark module) at (x, y), `size` points wide. */
function qrCode(doc: Doc, url: string, x: number, y: number, size: number): void {
  const qr = QRCode.create(url, { errorCorrectionLevel: 'M' });
  const count = qr.modules.size;
  const quiet = 2;
  const cell = size / (count + 2 * quiet);
  doc.rect(x, y, size, size).fillColor('#ffffff').fill();
  doc.fillColor('#000000');
  for (let r = 0; r < count; r++) {
    for (let c = 0; c < count; c++) {
      if (qr.modules.get(r, c)) doc.rect(x + (c + quiet) * cell, y + (r + quiet) * cell, cell + 0.01, cell + 0.01);
    }
  }
  doc.fill();
}

/** The certificate of one verdict, as the bytes of a PDF document. */
export async function renderCertificate(data: CertificateData, generatedAt = new Date()): Promise<Buffer> {
  const { verdict } = data;
  const engine = verdict.result as unknown as EngineVerdict;
  const fmt = createFormats('en-GB');
  const q = verdictQuantities(engine.net);
  const qty = (x: number) => fmt.quantity(x, q.unit, q);
  const words = (text: string) => printable(localiseEngineText(text, fmt, q));

  const doc = new PDFDocument({
    size: 'A4',
    margins: { top: PAGE.margin, bottom: PAGE.margin, left: PAGE.margin, right: PAGE.margin },
    bufferPages: true,
    info: {
      Title: printable(`Verdict certificate: lot ${verdict.lot.lotCode} of ${verdict.product.name}`),
      Author: 'Lotproof',
      Subject: `Seal ${verdict.seal.value}`,
      Creator: 'Lotproof',
    },
  });
  const chunks: Buffer[] = [];
  doc.on('data', (c: Buffer) => chunks.push(c));
  const done = new Promise<Buffer>((resolve, reject) => {
    doc.on('end', () => resolve(Buffer.concat(chunks)));
    doc.on('error', reject);
  });
  doc.registerFont('Inter', FONT_REGULAR);
  doc.registerFont('Inter-Bold', FONT_BOLD);

  // Title block, with the QR code to the seal lookup at the right.
  const qrSize = 92;
  doc.font('Inter-Bold').fontSize(9).fillColor(BRAND).text('LOTPROOF · VERDICT CERTIFICATE', PAGE.margin, PAGE.margin, { width: WIDTH - qrSize - 12, characterSpacing: 0.6 });
  doc.moveDown(0.3).font('Inter-Bold').fontSize(18).fillColor(INK).text(printable(`Lot ${verdict.lot.lotCode}`), { width: WIDTH - qrSize - 12 });
  doc.font('Inter').fontSize(10).fillColor(INK_SOFT).text(printable(`${verdict.product.name} · ${verdict.product.sku}`), { width: WIDTH - qrSize - 12 });
  doc.font('Inter').fontSize(8).fillColor(INK_SOFT).text(printable(`${engine.rulebook.title}, ${engine.rulebook.id} ${engine.rulebook.version} · engine ${engine.engineVersion}`), { width: WIDTH - qrSize - 12 });
  qrCode(doc, data.verifyUrl, PAGE.margin + WIDTH - qrSize, PAGE.margin - 4, qrSize);
  doc.font('Inter').fontSize(6.5).fillColor(INK_SOFT).text('Scan to check the seal', PAGE.margin + WIDTH - qrSize, PAGE.margin + qrSize - 2, { width: qrSize, align: 'center' });
  doc.x = PAGE.margin;
  doc.y = Math.max(doc.y, PAGE.margin + qrSize + 10);

  // Marks: withdrawn, re-test of, re-tested by.
  const marks: Array<[string, string]> = [];
  if (data.withdrawal) {
    const w = data.withdrawal;
    marks.push([FAIL, `WITHDRAWN${w.at ? ` on ${utc(w.at)}` : ''}${w.by ? ` by ${w.by}` : ''}${w.reason ? `: ${w.reason}` : ''}. The verdict stays sealed in the ledger; it no longer supports a release.`]);
  }
  if (verdict.retestOf) marks.push([HOLD, `Re-test of verdict ${verdict.retestOf.verdictId} (seal ${shortSeal(verdict.retestOf.seal)}). Reason: ${verdict.retestOf.reason}`]);
  if (verdict.retestedBy) marks.push([HOLD, `Re-tested by verdict ${verdict.retestedBy.verdictId} (${DECISION_WORDS[verdict.retestedBy.decision]}). Reason: ${verdict.retestedBy.reason}`]);
  if (verdict.firstSampleVerdictId) marks.push([INK_SOFT, `Second sample of verdict ${verdict.firstSampleVerdictId}: both samples are judged together.`]);
  for (const [colour, text] of marks) {
    const t = printable(text);
    const h = doc.font('Inter-Bold').fontSize(9).heightOfString(t, { width: WIDTH - 16 });
    const y = doc.y;
    doc.rect(PAGE.margin, y, WIDTH, h + 10).lineWidth(1).strokeColor(colour).stroke();
    doc.fillColor(colour).text(t, PAGE.margin + 8, y + 5, { width: WIDTH - 16 });
    doc.y = y + h + 16;
  }

  // The decision, per market.
  heading(doc, 'Decision');
  for (const s of releaseDecisions([engine], { lotCode: verdict.lot.lotCode }, fmt)) {
    const y = doc.y;
    const text = printable(s.sentence);
    const h = doc.font('Inter-Bold').fontSize(12).heightOfString(text, { width: WIDTH - 14 });
    doc.rect(PAGE.margin, y, 4, h).fillColor(ACTION_COLOUR[s.action]).fill();
    doc.font('Inter-Bold').fontSize(12).fillColor(INK).text(text, PAGE.margin + 12, y, { width: WIDTH - 14 });
    doc.font('Inter').fontSize(8.5).fillColor(INK_SOFT).text(printable(`${s.market} (${s.rulebookId}): ${DECISION_WORDS[engine.decision]}`), PAGE.margin + 12, doc.y + 1, { width: WIDTH - 14 });
  }
  doc.moveDown(0.5);
  const caution =
    'Caution: this verdict supports a release decision by the packer’s responsible person; it is not a legal certificate. Local weights-and-measures law and the competent authority prevail where they differ from the rulebook.';
  doc.font('Inter').fontSize(8.5).fillColor(HOLD).text(printable(caution), PAGE.margin, doc.y, { width: WIDTH });

  // The criteria, each with its clause (in the engine's sentence), and the rulebook's source.
  heading(doc, 'Criteria');
  for (const c of engine.criteria) {
    const text = words(c.sentence);
    const h = Math.max(doc.font('Inter').fontSize(9).heightOfString(text, { width: WIDTH - 58 }), 11);
    ensureRoom(doc, h + 3);
    const y = doc.y;
    const colour = c.passed === true ? BRAND : c.passed === false ? FAIL : HOLD;
    doc.font('Inter-Bold').fontSize(8).fillColor(colour).text(CRITERION_MARK(c.passed), PAGE.margin, y + 0.5, { width: 50 });
    doc.font('Inter').fontSize(9).fillColor(INK).text(text, PAGE.margin + 58, y, { width: WIDTH - 58 });
    doc.y = y + h + 3;
  }
  doc.font('Inter').fontSize(7.5).fillColor(INK_SOFT).text(printable(`Rulebook source: ${engine.rulebook.source}`), PAGE.margin, doc.y + 2, { width: WIDTH });

  // The lot and the figures, side by side.
  heading(doc, 'Lot and figures', 160);
  const by = verdict.submittedBy;
  const d = engine.statistics.descriptive;
  const t = engine.statistics.meanTest;
  const n = engine.net;
  const half = (WIDTH - 16) / 2;
  const top = doc.y;
  facts(doc, [
    ['Line', verdict.lot.line ?? '—'],
    ['Packed', utc(verdict.lot.packedAt)],
    ['Lot size', `${fmt.count(verdict.lot.lotSize)} packs`],
    ['Measured', `${fmt.count(verdict.lot.measurementCount)} packs in ${verdict.lot.measurementUnit}, ${verdict.lot.testing}`],
    ['Your reference', verdict.lot.clientReference ?? '—'],
    ['Submitted by', by === null ? '—' : by.kind === 'user' ? by.email : `API key ${by.name} (${by.prefix})`],
    ['Sealed', utc(verdict.recordedAt)],
  ], 82, PAGE.margin, half);
  const leftEnd = doc.y;
  doc.y = top;
  const rows: Fact[] = [['Nominal quantity Qn', qty(n.nominalQuantity)]];
  if (n.tolerableNegativeError !== null) rows.push(['TNE', qty(n.tolerableNegativeError)]);
  if (n.t1Limit !== null) rows.push(['T1 = Qn − TNE', qty(n.t1Limit)]);
  if (n.t2Limit !== null) rows.push(['T2 = Qn − 2 × TNE', qty(n.t2Limit)]);
  rows.push(
    ['Packs judged', fmt.count(d.n)],
    ['Mean', qty(d.mean)],
    ['Standard deviation', d.standardDeviation === null ? '—' : qty(d.standardDeviation)],
    ['Min – max', `${qty(d.min)} – ${qty(d.max)}`],
    [`${t.method === 'one-sample t' ? 't' : 'z'} statistic`, t.statistic === null ? '—' : `${fmt.statistic(t.statistic)}${t.degreesOfFreedom === null ? '' : `, ${fmt.count(t.degreesOfFreedom)} d.f.`}`],
    ['p-value', `${fmt.pValue(t.pValue)} (α ${fmt.plain(t.alpha)})`],
    ['Packs below T1 / T2', `${fmt.count(n.belowT1Indices.length)} / ${fmt.count(n.belowT2Indices.length)}`],
  );
  facts(doc, rows, 104, PAGE.margin + half + 16, half);
  doc.x = PAGE.margin;
  doc.y = Math.max(leftEnd, doc.y);
  if (data.net.length > 0) {
    heading(doc, 'Net contents', 190);
    histogram(doc, data.net, engine, fmt);
  }

  // The seal, its signature and key, and the checkpoint it is proven in.
  heading(doc, 'Seal', 120);
  const p = data.proven;
  facts(doc, [
    ['Seal (SHA-256, RFC 8785)', verdict.seal.value, 8.5],
    ['Signature (Ed25519)', verdict.seal.signature, 6.8],
    ['Key id (kid)', verdict.seal.kid, 8.5],
    ['Position in the ledger', `#${fmt.count(verdict.seal.sequence)}${verdict.seal.previousSeal ? `, after seal ${verdict.seal.previousSeal}` : ', the first of the ledger'}`],
    [
      'Proven in checkpoint',
      p.kind === 'proven'
        ? `tree size ${fmt.count(p.checkpoint.treeSize)}, root ${p.checkpoint.rootHash}, issued ${utc(p.checkpoint.issuedAt)}, signed by key ${p.checkpoint.kid}; inclusion proof of ${fmt.count(p.proofHashes)} hashes checked against the root (RFC 9162 §2.1.3)`
        : `not yet: the latest checkpoint ${p.latestTreeSize === null ? 'does not exist yet' : `covers ${fmt.count(p.latestTreeSize)} seals`}; the next checkpoint will cover this seal`,
    ],
    ['Check it', data.verifyUrl, 6.5],
  ], 124);
  doc.font('Inter').fontSize(7.5).fillColor(INK_SOFT).text(
    'Anyone holding the sealed record can check the seal offline: the SHA-256 of the record’s RFC 8785 canonical JSON is the seal, and the signature verifies with the key of that kid in /.well-known/jwks.json.',
    PAGE.margin, doc.y + 4, { width: WIDTH },
  );

  // Footer on every page.
  const range = doc.bufferedPageRange();
  for (let i = range.start; i < range.start + range.count; i++) {
    doc.switchToPage(i);
    const footer = printable(`Lotproof certificate · lot ${verdict.lot.lotCode} · seal ${shortSeal(verdict.seal.value)} · generated ${utc(generatedAt.toISOString())} · page ${i + 1} of ${range.count}`);
    doc.page.margins.bottom = 0;
    doc.font('Inter').fontSize(7).fillColor(INK_SOFT).text(footer, PAGE.margin, PAGE.height - PAGE.margin + 14, { width: WIDTH, align: 'center', lineBreak: false });
    doc.lineWidth(0.5).strokeColor(LINE).moveTo(PAGE.margin, PAGE.height - PAGE.margin + 8).lineTo(PAGE.margin + WIDTH, PAGE.height - PAGE.margin + 8).stroke();
  }
  doc.end();
  return done;
}
