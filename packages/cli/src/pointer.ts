/**
 * Addressing scenario parameters: JSON Pointer (RFC 6901) paths into the scenario JSON, with
 * one extension: inside an array, a segment that is not an index selects the item whose "id"
 * (or "name") equals it, so "/plant/elements/L1/henries" works. Also dotted lookup of summary
 * values ("signals.L1.current.mean"), where keys may themselves contain dots.
 * @module
 */

function decode(segment: string): string {
  return segment.replaceAll('~1', '/').replaceAll('~0', '~');
}

/** Splits a JSON Pointer; throws an Error naming the problem. */
export function splitPointer(pointer: string): string[] {
  if (pointer === '') return [];
  if (!pointer.startsWith('/')) throw new Error(`"${pointer}" is not a JSON Pointer (it must start with "/")`);
  return pointer.slice(1).split('/').map(decode);
}

function childKey(container: unknown, segment: string, pointer: string): string | number {
  if (Array.isArray(container)) {
    if (/^(0|[1-9]\d*)$/.test(segment)) {
      const i = Number(segment);
      if (i >= container.length) throw new Error(`${pointer}: index ${i} is past the end (${container.length} items)`);
      return i;
    }
    const i = container.findIndex((x) => x !== null && typeof x === 'object' && ((x as Record<string, unknown>).id === segment || (x as Record<string, unknown>).name === segment));
    if (i < 0) throw new Error(`${pointer}: no item with id "${segment}"`);
    return i;
  }
  if (container !== null && typeof container === 'object') return segment;
  throw new Error(`${pointer}: "${segment}" is inside a value that is not an object or array`);
}

/** Value at a pointer; throws an Error when a step does not exist. */
export function getAt(root: unknown, pointer: string): unknown {
  let cur = root;
  for (const seg of splitPointer(pointer)) {
    const k = childKey(cur, seg, pointer);
    const next = (cur as Record<string | number, unknown>)[k];
    if (next === undefined) throw new Error(`${pointer}: "${seg}" does not exist`);
    cur = next;
  }
  return cur;
}

/**
 * Copy of `root` with the value at `pointer` replaced (structural sharing is avoided: the
 * whole document is cloned so callers may keep the original). The parent must exist; the
 * last member may be new (an optional field).
 */
export function setAt(root: unknown, pointer: string, value: unknown): unknown {
  const segs = splitPointer(pointer);
  if (segs.length === 0) return value;
  const copy = structuredClone(root);
  let cur: unknown = copy;
  for (let i = 0; i < segs.length - 1; i++) {
    const k = childKey(cur, segs[i]!, pointer);
    const next = (cur as Record<string | number, unknown>)[k];
    if (next === undefined || next === null || typeof next !== 'object') throw new Error(`${pointer}: "${segs[i]!}" does not exist`);
    cur = next;
  }
  const last = segs[segs.length - 1]!;
  if (Array.isArray(cur) && !/^(0|[1-9]\d*)$/.test(last)) throw new Error(`${pointer}: "${last}" is not an index of an array`);
  (cur as Record<string | number, unknown>)[childKey(cur, last, pointer)] = value;
  return copy;
}

/** Looks up a dotted path in a summary object; keys may contain dots ("L1.current"). */
export function lookupDotted(root: unknown, path: string): unknown {
  const tokens = path.split('.');
  const walk = (obj: unknown, i: number): unknown => {
    if (i === tokens.length) return obj;
    if (obj === null || typeof obj !== 'object') return undefined;
    for (let j = tokens.length; j > i; j--) {
      const key = tokens.slice(i, j).join('.');
      if (Object.hasOwn(obj, key)) {
        const r = walk((obj as Record<string, unknown>)[key], j);
        if (r !== undefined) return r;
      }
    }
    return undefined;
  };
  return walk(root, 0);
}
