/**
 * CSV output following RFC 4180 ("Common Format and MIME Type for Comma-Separated Values
 * (CSV) Files"): comma separators, CRLF line ends, fields quoted when they contain a comma,
 * a double quote, CR or LF, and double quotes inside quoted fields doubled.
 *
 * Files are written under a temporary name next to the target and renamed into place on
 * {@link CsvWriter.commit}, so a reader never sees a half-written file under the target name.
 *
 * @module
 */
import * as fs from 'node:fs';
import { rename, unlink } from 'node:fs/promises';

/** A CSV column: its name and, optionally, its SI unit (shown as `name [unit]`). */
export interface CsvColumn {
  name: string;
  unit?: string;
}

/** Row sink shared by {@link openCsvFile} and {@link csvToStdout}. */
export interface CsvWriter {
  /**
   * Appends one record: the numbers first (formatted by {@link csvNumber}), then the `extra`
   * text fields. The total field count must equal the number of columns.
   * @throws Error on a wrong field count, a non-finite number, a write failure, or after
   *   commit/abort.
   */
  row(values: ArrayLike<number>, extra?: string[]): void;
  /** Writes out everything buffered and finishes the output (for files: renames into place). */
  commit(): Promise<void>;
  /** Abandons the output (for files: deletes the temporary file). Safe to call more than once. */
  abort(): Promise<void>;
}

/** Record terminator, RFC 4180 section 2, rules 1 and 2. */
export const CRLF = '\r\n';

/** Size at which buffered rows are handed to the file or stream. */
const CHUNK_CHARS = 64 * 1024;

const NEEDS_QUOTES = /[",\r\n]/;

/**
 * Renders one field, quoting it if it contains a comma, a double quote, CR or LF, with inner
 * double quotes doubled (RFC 4180 section 2, rules 5 to 7). Other fields are returned as is.
 */
export function csvField(s: string): string {
  return NEEDS_QUOTES.test(s) ? `"${s.replaceAll('"', '""')}"` : s;
}

/** Renders one record: the fields rendered by {@link csvField}, comma-separated, ending in CRLF. */
export function csvRecord(fields: readonly string[]): string {
  return fields.map(csvField).join(',') + CRLF;
}

/**
 * Renders the header record, e.g. `time [s],L1.current [A],mode` followed by CRLF.
 * A column without a unit (or with an empty one) shows its name alone.
 */
export function csvHeader(columns: readonly CsvColumn[]): string {
  return csvRecord(columns.map(columnTitle));
}

function columnTitle(column: CsvColumn): string {
  return column.unit === undefined || column.unit === '' ? column.name : `${column.name} [${column.unit}]`;
}

/**
 * Formats a number as the shortest decimal that reads back to the same binary64 value
 * (`String(x)`, e.g. `0.1`, `1e-7`, `4.7e-6`); negative zero prints as `0`.
 * @throws Error if `x` is NaN or infinite, naming the value as non-finite.
 */
export function csvNumber(x: number): string {
  if (!Number.isFinite(x)) {
    throw new Error(`CSV value ${String(x)} is non-finite; only finite numbers can be written`);
  }
  return String(x);
}

/** Formats a record of numbers plus text fields, checking the field count. */
function formatRow(columns: readonly CsvColumn[], values: ArrayLike<number>, extra: readonly string[] | undefined): string {
  const count = values.length + (extra?.length ?? 0);
  if (count !== columns.length) {
    throw new Error(`CSV row has ${count} fields but the header has ${columns.length} columns`);
  }
  let line = '';
  for (let i = 0; i < values.length; i++) {
    if (i > 0) line += ',';
    line += csvNumber(values[i] as number); // numbers never need quoting
  }
  if (extra !== undefined) {
    for (let i = 0; i < extra.length; i++) {
      if (i > 0 || values.length > 0) line += ',';
      line += csvField(extra[i] as string);
    }
  }
  return line + CRLF;
}

/** Targets currently open in this process, so two writers cannot share a temporary file. */
const openTargets = new Set<string>();

/**
 * Opens a CSV file for streaming output and writes its header.
 *
 * Rows go to `<path>.partial-<pid>` in chunks of about 64 KiB, written synchronously so that
 * memory stays bounded even when the caller produces rows in a long synchronous loop (a
 * stream would only drain once the loop yields). {@link CsvWriter.commit} flushes, syncs the
 * data to disk and renames the temporary file over `path` (an atomic replacement on POSIX file
 * systems); {@link CsvWriter.abort} deletes it. If `row` throws, call `abort`.
 *
 * @param path - Target file name; its directory must exist.
 * @param columns - Column names and units for the header.
 * @throws Error if the temporary file cannot be created, or `path` is already open here.
 */
export function openCsvFile(path: string, columns: readonly CsvColumn[]): CsvWriter {
  const tempPath = `${path}.partial-${process.pid}`;
  if (openTargets.has(tempPath)) {
    throw new Error(`CSV file ${path} is already being written by this process`);
  }
  const fd = fs.openSync(tempPath, 'w');
  openTargets.add(tempPath);
  const cols = [...columns];
  let buffer = csvHeader(cols);
  let state: 'open' | 'committed' | 'aborted' = 'open';
  let closed = false;

  const close = (): void => {
    if (!closed) {
      closed = true;
      openTargets.delete(tempPath);
      fs.closeSync(fd);
    }
  };
  const flush = (): void => {
    if (buffer.length > 0) {
      const data = buffer;
      buffer = '';
      fs.writeFileSync(fd, data); // loops until every byte is written
    }
  };
  const checkOpen = (): void => {
    if (state !== 'open') throw new Error(`CSV file ${path} was already ${state}`);
  };

  return {
    row(values, extra) {
      checkOpen();
      buffer += formatRow(cols, values, extra);
      if (buffer.length >= CHUNK_CHARS) flush();
    },
    async commit() {
      checkOpen();
      state = 'committed';
      try {
        flush();
        fs.fsyncSync(fd);
        close();
        await rename(tempPath, path);
      } catch (error) {
        close();
        await unlink(tempPath).catch(() => undefined);
        throw error;
      }
    },
    async abort() {
      if (state === 'aborted') return;
      if (state === 'committed') throw new Error(`CSV file ${path} was already committed`);
      state = 'aborted';
      buffer = '';
      try {
        close();
      } finally {
        await unlink(tempPath).catch((error: NodeJS.ErrnoException) => {
          if (error.code !== 'ENOENT') throw error;
        });
      }
    },
  };
}

/**
 * Streams CSV to any writable stream; see {@link csvToStdout}. The stream is not ended by
 * `commit`, so it can be shared (process.stdout must never be ended).
 */
export function csvToStream(stream: NodeJS.WritableStream, columns: readonly CsvColumn[]): CsvWriter {
  const cols = [...columns];
  let buffer = csvHeader(cols);
  let state: 'open' | 'committed' | 'aborted' = 'open';
  let failure: Error | undefined;
  const onError = (error: Error): void => {
    failure ??= error;
  };
  stream.on('error', onError);
  const detach = (): void => {
    stream.removeListener('error', onError);
  };
  const checkOpen = (): void => {
    if (failure !== undefined) throw failure;
    if (state !== 'open') throw new Error(`CSV output was already ${state}`);
  };

  return {
    row(values, extra) {
      checkOpen();
      buffer += formatRow(cols, values, extra);
      if (buffer.length >= CHUNK_CHARS) {
        stream.write(buffer);
        buffer = '';
      }
    },
    async commit() {
      checkOpen();
      state = 'committed';
      const data = buffer;
      buffer = '';
      try {
        // The callback fires once this (and so every earlier) chunk has been handed on.
        await new Promise<void>((resolve, reject) => {
          stream.write(data, (error) => (error ? reject(error) : resolve()));
        });
        if (failure !== undefined) throw failure;
      } finally {
        detach();
      }
    },
    async abort() {
      if (state === 'committed') throw new Error('CSV output was already committed');
      state = 'aborted';
      buffer = ''; // rows already handed to the stream cannot be taken back
      detach();
    },
  };
}

/**
 * Streams CSV to standard output: header first, then rows in chunks of about 64 KiB.
 * `commit` writes the rest and waits until it has been handed to the operating system;
 * `abort` drops rows not yet written (earlier chunks have already gone out). A write error
 * such as a closed pipe is reported by the next `row` or by `commit`.
 */
export function csvToStdout(columns: readonly CsvColumn[]): CsvWriter {
  return csvToStream(process.stdout, columns);
}

/**
 * Parses RFC 4180 CSV text into records of fields.
 *
 * Records end with CRLF (or a bare LF, accepted for files edited on other systems); the
 * final line break is optional. Fields may be quoted, with `""` standing for one quote, and
 * quoted fields may contain commas and line breaks. An empty line is a record with one empty
 * field; empty text gives no records.
 *
 * @throws Error naming the line and column of malformed input: a quote inside an unquoted
 *   field, text after a closing quote, a bare CR, or an unterminated quoted field.
 */
export function parseCsv(text: string): string[][] {
  const records: string[][] = [];
  let record: string[] = [];
  let field = '';
  let i = 0;
  let line = 1;
  let lineStart = 0;
  const fail = (what: string, at: number): never => {
    throw new Error(`CSV parse error at line ${line}, column ${at - lineStart + 1}: ${what}`);
  };
  const n = text.length;
  if (n === 0) return records;
  for (;;) {
    // At the start of a field.
    if (text.charCodeAt(i) === 0x22 /* " */) {
      const open = i;
      i++;
      for (;;) {
        const q = text.indexOf('"', i);
        if (q < 0) return fail('quoted field is not closed', open);
        const chunk = text.slice(i, q);
        field += chunk;
        for (let k = chunk.indexOf('\n'); k >= 0; k = chunk.indexOf('\n', k + 1)) {
          line++;
          lineStart = i + k + 1;
        }
        if (text.charCodeAt(q + 1) === 0x22) {
          field += '"';
          i = q + 2;
        } else {
          i = q + 1;
          break;
        }
      }
    } else {
      let j = i;
      while (j < n) {
        const c = text.charCodeAt(j);
        if (c === 0x2c || c === 0x0a || c === 0x0d) break;
        if (c === 0x22) fail('double quote inside an unquoted field', j);
        j++;
      }
      field = text.slice(i, j);
      i = j;
    }
    // After a field: end of text, comma, or line break.
    if (i >= n) {
      record.push(field);
      records.push(record);
      return records;
    }
    const c = text.charCodeAt(i);
    if (c === 0x2c) {
      record.push(field);
      field = '';
      i++;
      continue;
    }
    if (c === 0x0d && text.charCodeAt(i + 1) !== 0x0a) fail('CR not followed by LF', i);
    if (c === 0x0d || c === 0x0a) {
      record.push(field);
      records.push(record);
      record = [];
      field = '';
      i += c === 0x0d ? 2 : 1;
      line++;
      lineStart = i;
      if (i >= n) return records;
      continue;
    }
    fail('text after a closing quote', i);
  }
}
