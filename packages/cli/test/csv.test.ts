import { afterEach, beforeEach, describe, expect, it } from 'vitest';
import fc from 'fast-check';
import * as fs from 'node:fs';
import * as os from 'node:os';
import * as path from 'node:path';
import { Writable } from 'node:stream';
import {
  CRLF,
  csvField,
  csvHeader,
  csvNumber,
  csvRecord,
  csvToStream,
  openCsvFile,
  parseCsv,
} from '../src/csv.ts';

// Rule numbers refer to RFC 4180, section 2 ("Definition of the CSV Format").
describe('csvField', () => {
  it('leaves fields without special characters alone (rules 4 and 5: quoting is optional)', () => {
    expect(csvField('aaa')).toBe('aaa');
    expect(csvField('')).toBe('');
    expect(csvField(' padded ')).toBe(' padded '); // rule 4: spaces are part of a field
    expect(csvField('µH Ω')).toBe('µH Ω');
  });

  it('quotes fields with line breaks, double quotes or commas (rule 6)', () => {
    expect(csvField('b\r\nbb')).toBe('"b\r\nbb"');
    expect(csvField('a\nb')).toBe('"a\nb"');
    expect(csvField('a\rb')).toBe('"a\rb"');
    expect(csvField('a,b')).toBe('"a,b"');
  });

  it('doubles double quotes inside a quoted field (rule 7)', () => {
    expect(csvField('b"bb')).toBe('"b""bb"');
    expect(csvField('"')).toBe('""""');
    expect(csvField('say "hi", then')).toBe('"say ""hi"", then"');
  });
});

describe('csvRecord and csvHeader', () => {
  it('ends every record with CRLF (rule 1)', () => {
    expect(CRLF).toBe('\r\n');
    expect(csvRecord(['aaa', 'b"bb', 'ccc'])).toBe('aaa,"b""bb",ccc\r\n');
  });

  it('shows units in brackets after the column names (rule 3: optional header line)', () => {
    expect(
      csvHeader([{ name: 'time', unit: 's' }, { name: 'L1.current', unit: 'A' }, { name: 'mode' }, { name: 'x', unit: '' }]),
    ).toBe('time [s],L1.current [A],mode,x\r\n');
    expect(csvHeader([{ name: 'a,b', unit: 'V' }])).toBe('"a,b [V]"\r\n');
  });
});

describe('csvNumber', () => {
  it('prints the shortest decimal that reads back to the same double', () => {
    expect(csvNumber(0.1)).toBe('0.1');
    expect(csvNumber(0.1 + 0.2)).toBe('0.30000000000000004');
    expect(csvNumber(4.7e-6)).toBe('0.0000047');
    expect(csvNumber(1e-7)).toBe('1e-7');
    expect(csvNumber(-12.5)).toBe('-12.5');
    expect(csvNumber(1e21)).toBe('1e+21');
    expect(csvNumber(-0)).toBe('0');
    expect(csvNumber(Number.MIN_VALUE)).toBe('5e-324');
  });

  it('throws for non-finite values, saying so', () => {
    expect(() => csvNumber(Number.NaN)).toThrow(/NaN is non-finite/);
    expect(() => csvNumber(Number.POSITIVE_INFINITY)).toThrow(/Infinity is non-finite/);
    expect(() => csvNumber(Number.NEGATIVE_INFINITY)).toThrow(/-Infinity is non-finite/);
  });

  it('round-trips every finite double', () => {
    fc.assert(
      fc.property(fc.double({ noNaN: true, noDefaultInfinity: true }), (x) => {
        expect(Number(csvNumber(x))).toBe(x === 0 ? 0 : x);
      }),
      { seed: 7, numRuns: 500 },
    );
  });
});

describe('parseCsv', () => {
  it('reads the examples of RFC 4180 section 2', () => {
    // rule 1
    expect(parseCsv('aaa,bbb,ccc\r\nzzz,yyy,xxx\r\n')).toEqual([
      ['aaa', 'bbb', 'ccc'],
      ['zzz', 'yyy', 'xxx'],
    ]);
    // rule 2: last record without a line break
    expect(parseCsv('aaa,bbb,ccc\r\nzzz,yyy,xxx')).toEqual([
      ['aaa', 'bbb', 'ccc'],
      ['zzz', 'yyy', 'xxx'],
    ]);
    // rule 3: header line, same format
    expect(parseCsv('field_name,field_name,field_name\r\naaa,bbb,ccc\r\n')).toEqual([
      ['field_name', 'field_name', 'field_name'],
      ['aaa', 'bbb', 'ccc'],
    ]);
    // rule 5: quoted fields
    expect(parseCsv('"aaa","bbb","ccc"\r\nzzz,yyy,xxx')).toEqual([
      ['aaa', 'bbb', 'ccc'],
      ['zzz', 'yyy', 'xxx'],
    ]);
    // rule 6: line break inside a quoted field
    expect(parseCsv('"aaa","b\r\nbb","ccc"\r\nzzz,yyy,xxx')).toEqual([
      ['aaa', 'b\r\nbb', 'ccc'],
      ['zzz', 'yyy', 'xxx'],
    ]);
    // rule 7: doubled quote
    expect(parseCsv('"aaa","b""bb","ccc"')).toEqual([['aaa', 'b"bb', 'ccc']]);
  });

  it('handles empty fields, empty lines, bare LF and empty text', () => {
    expect(parseCsv('')).toEqual([]);
    expect(parseCsv('\r\n')).toEqual([['']]);
    expect(parseCsv(',,\r\n')).toEqual([['', '', '']]);
    expect(parseCsv('a\r\n\r\nb')).toEqual([['a'], [''], ['b']]);
    expect(parseCsv('a,b\nc,d\n')).toEqual([
      ['a', 'b'],
      ['c', 'd'],
    ]);
    expect(parseCsv('""')).toEqual([['']]);
    expect(parseCsv('a,""\r\n')).toEqual([['a', '']]);
  });

  it('rejects malformed text with a position', () => {
    expect(() => parseCsv('a"b,c')).toThrow(/line 1, column 2: double quote inside an unquoted field/);
    expect(() => parseCsv('x\r\n"ab"c')).toThrow(/line 2, column 5: text after a closing quote/);
    expect(() => parseCsv('a,"open')).toThrow(/line 1, column 3: quoted field is not closed/);
    expect(() => parseCsv('a\rb')).toThrow(/CR not followed by LF/);
  });

  it('reads back whatever csvRecord writes', () => {
    const text = fc.oneof(
      fc.string({ unit: 'binary' }),
      fc.string({ unit: fc.constantFrom(',', '"', '\r', '\n', 'a', ' ', 'é', '1') }),
    );
    fc.assert(
      fc.property(fc.array(fc.array(text, { minLength: 1, maxLength: 6 }), { maxLength: 8 }), (records) => {
        const csv = records.map((r) => csvRecord(r)).join('');
        expect(parseCsv(csv)).toEqual(records);
      }),
      { seed: 7, numRuns: 500 },
    );
  });
});

describe('openCsvFile', () => {
  let dir: string;
  beforeEach(() => {
    dir = fs.mkdtempSync(path.join(os.tmpdir(), 'edgewise-csv-'));
  });
  afterEach(() => {
    fs.rmSync(dir, { recursive: true, force: true });
  });
  const columns = [{ name: 'time', unit: 's' }, { name: 'L1.current', unit: 'A' }, { name: 'mode' }];

  it('writes under a temporary name and renames on commit', async () => {
    const target = path.join(dir, 'out.csv');
    const csv = openCsvFile(target, columns);
    csv.row([0, 0.5], ['CCM']);
    csv.row(new Float64Array([1e-6, -0.25]), ['DCM, light load']);
    expect(fs.readdirSync(dir)).toEqual([`out.csv.partial-${process.pid}`]);
    await csv.commit();
    expect(fs.readdirSync(dir)).toEqual(['out.csv']);
    expect(fs.readFileSync(target, 'utf8')).toBe(
      'time [s],L1.current [A],mode\r\n0,0.5,CCM\r\n0.000001,-0.25,"DCM, light load"\r\n',
    );
  });

  it('deletes the temporary file on abort and keeps an existing target untouched', async () => {
    const target = path.join(dir, 'out.csv');
    fs.writeFileSync(target, 'previous\r\n');
    const csv = openCsvFile(target, columns);
    csv.row([1, 2], ['x']);
    await csv.abort();
    await csv.abort(); // idempotent
    expect(fs.readdirSync(dir)).toEqual(['out.csv']);
    expect(fs.readFileSync(target, 'utf8')).toBe('previous\r\n');
    expect(() => csv.row([1, 2], ['x'])).toThrow(/already aborted/);
  });

  it('replaces an existing target only on commit', async () => {
    const target = path.join(dir, 'out.csv');
    fs.writeFileSync(target, 'previous\r\n');
    const csv = openCsvFile(target, [{ name: 'v', unit: 'V' }]);
    csv.row([3.3]);
    expect(fs.readFileSync(target, 'utf8')).toBe('previous\r\n');
    await csv.commit();
    expect(fs.readFileSync(target, 'utf8')).toBe('v [V]\r\n3.3\r\n');
  });

  it('writes many chunks and keeps every value exact', async () => {
    const target = path.join(dir, 'big.csv');
    const csv = openCsvFile(target, [{ name: 'time', unit: 's' }, { name: 'v', unit: 'V' }]);
    const rows = 20_000; // about 0.7 MB, several 64 KiB chunks
    for (let k = 0; k < rows; k++) csv.row([k * 1e-7, Math.sin(k)]);
    // Chunks have already reached the temporary file before commit.
    expect(fs.statSync(path.join(dir, `big.csv.partial-${process.pid}`)).size).toBeGreaterThan(64 * 1024);
    await csv.commit();
    const parsed = parseCsv(fs.readFileSync(target, 'utf8'));
    expect(parsed.length).toBe(rows + 1);
    expect(parsed[0]).toEqual(['time [s]', 'v [V]']);
    for (let k = 0; k < rows; k += 997) {
      expect(parsed[k + 1]).toEqual([String(k * 1e-7), String(Math.sin(k))]);
      expect(Number(parsed[k + 1]![1])).toBe(Math.sin(k));
    }
  });

  it('rejects bad rows and misuse with clear errors, leaving no file after abort', async () => {
    const target = path.join(dir, 'out.csv');
    const csv = openCsvFile(target, columns);
    expect(() => csv.row([1, 2])).toThrow('CSV row has 2 fields but the header has 3 columns');
    expect(() => csv.row([1, Number.NaN], ['x'])).toThrow(/non-finite/);
    expect(() => openCsvFile(target, columns)).toThrow(/already being written/);
    await csv.abort();
    expect(fs.readdirSync(dir)).toEqual([]);
    const again = openCsvFile(target, columns); // the name is free again
    await again.commit();
    await expect(again.commit()).rejects.toThrow(/already committed/);
    expect(fs.readFileSync(target, 'utf8')).toBe('time [s],L1.current [A],mode\r\n');
  });

  it('fails at open when the directory does not exist, creating nothing', () => {
    expect(() => openCsvFile(path.join(dir, 'missing', 'out.csv'), columns)).toThrow(/ENOENT/);
    expect(fs.readdirSync(dir)).toEqual([]);
  });
});

describe('csvToStream', () => {
  function collector(): { stream: Writable; text: () => string; ended: () => boolean } {
    const chunks: string[] = [];
    let ended = false;
    const stream = new Writable({
      write(chunk: Buffer, _encoding, callback) {
        chunks.push(chunk.toString('utf8'));
        callback();
      },
      final(callback) {
        ended = true;
        callback();
      },
    });
    return { stream, text: () => chunks.join(''), ended: () => ended };
  }

  it('writes header and rows on commit without ending the stream', async () => {
    const out = collector();
    const csv = csvToStream(out.stream, [{ name: 't', unit: 's' }, { name: 'note' }]);
    csv.row([0.5], ['a"b']);
    await csv.commit();
    expect(out.text()).toBe('t [s],note\r\n0.5,"a""b"\r\n');
    expect(out.ended()).toBe(false);
    expect(out.stream.listenerCount('error')).toBe(0);
  });

  it('drops rows not yet written on abort', async () => {
    const out = collector();
    const csv = csvToStream(out.stream, [{ name: 't', unit: 's' }]);
    csv.row([1]);
    await csv.abort();
    expect(out.text()).toBe('');
    expect(() => csv.row([2])).toThrow(/already aborted/);
  });

  it('reports a stream error on commit', async () => {
    const stream = new Writable({
      write(_chunk, _encoding, callback) {
        callback(new Error('EPIPE: broken pipe'));
      },
    });
    const csv = csvToStream(stream, [{ name: 't', unit: 's' }]);
    csv.row([1]);
    await expect(csv.commit()).rejects.toThrow(/broken pipe/);
  });
});
