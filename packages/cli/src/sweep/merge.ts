/**
 * Merging shard outputs of one sweep into a single file sorted by point index.
 * @module
 */
import { readFileSync } from 'node:fs';
import { csvRecord, parseCsv } from '../csv.ts';
import { InputError } from '../errors.ts';

/** Merges sweep CSV texts; throws InputError on different headers or conflicting rows. */
export function mergeSweepFiles(files: readonly string[]): { text: string; points: number; gaps: number } {
  let header: string[] | undefined;
  const rows = new Map<number, { row: string[]; file: string }>();
  for (const file of files) {
    let records: string[][];
    try {
      records = parseCsv(readFileSync(file, 'utf8'));
    } catch (err) {
      const code = (err as NodeJS.ErrnoException).code;
      throw new InputError(file, [code === 'ENOENT' ? 'file not found' : (err as Error).message]);
    }
    if (records.length === 0) throw new InputError(file, ['empty file (no header)']);
    const h = records[0]!;
    if (h[0] !== 'point' || h[h.length - 1] !== 'message') throw new InputError(file, ['not a sweep result (its header must start with "point" and end with "message")']);
    if (header === undefined) header = h;
    else if (h.join('\u0000') !== header.join('\u0000')) throw new InputError(file, [`columns differ from ${files[0]!}; shards of one sweep have the same columns`]);
    records.slice(1).forEach((r, i) => {
      if (r.length !== h.length || !/^\d+$/.test(r[0]!)) throw new InputError(file, [`line ${i + 2}: not a sweep row`]);
      const k = Number(r[0]);
      const prior = rows.get(k);
      if (prior !== undefined && prior.row.join('\u0000') !== r.join('\u0000')) {
        throw new InputError(file, [`point ${k} differs from the same point in ${prior.file}`]);
      }
      rows.set(k, { row: r, file });
    });
  }
  const sorted = [...rows.keys()].sort((a, b) => a - b);
  const max = sorted.length > 0 ? sorted[sorted.length - 1]! : -1;
  const text = [header!, ...sorted.map((k) => rows.get(k)!.row)].map(csvRecord).join('');
  return { text, points: sorted.length, gaps: max + 1 - sorted.length };
}
