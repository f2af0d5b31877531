// The console reads a lot's CSV as the server does: CsvDropZone (the lot form's file control) on the
// fixtures of tests/fixtures/csv, with the choices of each case, gives the outcome of outcomes.json
// (the same cases tests/unit/lot-csv-fixtures.test.ts and tests/integration/lots-csv-fixtures.test.ts
// run): the values and their lines, what was read and the blank lines skipped, shown to the user;
// or the refusal naming the line, with buttons for what to choose.
import { describe, expect, it } from 'vitest';
import { flushPromises, mount } from '@vue/test-utils';
import CsvDropZone from '../../console/src/components/CsvDropZone.vue';
import type { ParsedMeasurements } from '../../console/src/lib/csv';
import { CSV_CASES, type CsvCase } from '../fixtures/csv/cases';

// The fixtures as Vite reads them (raw text, a BOM and CRLFs kept: checked below), encoded back to UTF-8 bytes.
const files = import.meta.glob<string>('../fixtures/csv/*.csv', { query: '?raw', import: 'default', eager: true });
const fixtureText = (file: string) => files[`../fixtures/csv/${file}`]!;
const fixtureBytes = (file: string) => new TextEncoder().encode(fixtureText(file));

async function dropped(c: CsvCase) {
  const w = mount(CsvDropZone, { props: { column: c.query.column, delimiter: c.query.delimiter ?? '', decimal: c.query.decimal ?? '' } });
  const input = w.find('input[type=file]');
  const file = new File([fixtureBytes(c.file) as BlobPart], c.file, { type: 'text/csv' });
  Object.defineProperty(input.element, 'files', { value: [file] });
  await input.trigger('change');
  await flushPromises();
  const events = w.emitted('parsed') as [ParsedMeasurements | null, string][] | undefined;
  expect(events, 'CsvDropZone emits what it read').toBeTruthy();
  return { w, parsed: events!.at(-1)![0]! };
}

describe('CsvDropZone on the CSV fixtures', () => {
  it('has every fixture file, its bytes as written (a BOM, CRLF)', () => {
    for (const c of CSV_CASES) expect(fixtureText(c.file), c.file).toBeTypeOf('string');
    expect(fixtureText('bom-crlf.csv').charCodeAt(0)).toBe(0xfeff);
    expect(fixtureText('bom-crlf.csv')).toContain('\r\n');
  });

  it.each(CSV_CASES.map((c) => [c.name, c] as const))('%s', async (_name, c) => {
    const { w, parsed } = await dropped(c);
    if (c.read) {
      expect(parsed.problems, c.why).toEqual([]);
      expect({
        measurements: parsed.measurements,
        tares: c.read.tares ? parsed.tares : null,
        lines: parsed.lines,
        delimiter: parsed.delimiter,
        decimal: parsed.decimal,
        blankLines: parsed.blankLines,
      }, c.why).toEqual(c.read);
      const said = w.find('[data-csv-reading]').text();
      expect(said).toContain(`${c.read.measurements.length} row`);
      if (c.read.blankLines.length) expect(said).toContain(`blank line${c.read.blankLines.length === 1 ? '' : 's'} skipped: ${c.read.blankLines.join(', ')}`);
      return;
    }
    const r = c.refused!;
    expect(parsed.problems.length, c.why).toBe(1);
    expect(parsed.problems[0]).toContain(r.says);
    if (r.line !== null) expect(parsed.problems[0]).toMatch(new RegExp(`^Line ${r.line}: `));
    expect(parsed.choose).toEqual(r.choose);
    expect(w.find('[data-csv-problem]').text()).toContain(r.says);
    const offered = w.findAll('[data-csv-choose]').map((b) => b.attributes('data-csv-choose'));
    expect(offered).toEqual([...(r.choose.delimiter ?? []).map((d) => `delimiter=${d}`), ...(r.choose.decimal ?? []).map((d) => `decimal=${d}`)]);
  });

  it('reads the file again with what the user chooses: the one-column file of decimal commas', async () => {
    const c = CSV_CASES.find((x) => x.file === 'one-column-commas.csv' && !x.query.decimal)!;
    const { w } = await dropped(c);
    await w.find('[data-csv-choose="decimal=comma"]').trigger('click');
    await flushPromises();
    const events = w.emitted('parsed') as [ParsedMeasurements, string][];
    const again = events.at(-1)![0];
    // the values as written in the file: 498,5 and 502,4
    expect(again.measurements).toEqual([498.5, 502.4]);
    expect(w.emitted('update:decimal')!.at(-1)).toEqual(['comma']);
  });
});
