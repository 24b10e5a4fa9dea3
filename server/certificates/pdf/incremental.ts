import { inflateSync } from 'node:zlib';
// Reading the cross-reference tables of our own PDFs and appending incremental updates (ISO 32000-1:2008
// 7.5.4 cross-reference table, 7.5.5 trailer, 7.5.6 incremental updates). Only classic xref tables are read:
// pdfkit and the signing placeholder write nothing else, and the verifier treats anything else as foreign.

export interface XrefSection {
  /** Byte offset of the `xref` keyword. */
  offset: number;
  /** Object number → byte offset, for the in-use entries of this section. */
  entries: Map<number, number>;
  trailer: string;
  prev?: number;
}

export interface PdfStructure {
  /** Newest section first. */
  sections: XrefSection[];
  /** Newest offset of every in-use object. */
  offsets: Map<number, number>;
  size: number;
  rootRef: string;
  infoRef?: string;
  id?: string;
}

const MAX_SECTIONS = 16;

function trailerValue(trailer: string, key: string): string | undefined {
  const m = new RegExp(`/${key}\\s+(\\d+\\s+\\d+\\s+R|\\d+|\\[[^\\]]*\\])`).exec(trailer);
  return m?.[1];
}

function lastStartXref(text: string, end = text.length): number {
  const at = text.lastIndexOf('startxref', end);
  if (at === -1) throw new Error('no startxref found');
  const m = /^startxref\s+(\d+)/.exec(text.slice(at, at + 40));
  if (!m) throw new Error('malformed startxref');
  return Number(m[1]);
}

function readSection(text: string, pointer: number): XrefSection {
  // @signpdf's placeholder update points at the end-of-line before `xref`; readers tolerate that, so do we.
  let offset = pointer;
  while (offset < pointer + 2 && (text[offset] === '\n' || text[offset] === '\r')) offset++;
  if (text.slice(offset, offset + 4) !== 'xref') throw new Error(`no classic xref table at offset ${offset}`);
  const entries = new Map<number, number>();
  const re = /(\d+)\s+(\d+)[ \t]*\r?\n/y;
  let pos = offset + 4;
  while (/\s/.test(text[pos])) pos++;
  for (;;) {
    re.lastIndex = pos;
    const head = re.exec(text);
    if (!head) break;
    const start = Number(head[1]);
    const count = Number(head[2]);
    pos = re.lastIndex;
    for (let i = 0; i < count; i++) {
      const line = text.slice(pos, pos + 20);
      const m = /^(\d{10}) (\d{5}) ([nf])/.exec(line);
      if (!m) throw new Error(`malformed xref entry at offset ${pos}`);
      if (m[3] === 'n') entries.set(start + i, Number(m[1]));
      pos += 20;
    }
  }
  const trailerAt = text.indexOf('trailer', pos);
  const endAt = text.indexOf('startxref', trailerAt);
  if (trailerAt === -1 || endAt === -1 || trailerAt - pos > 4) throw new Error(`no trailer after the xref table at ${offset}`);
  const trailer = text.slice(trailerAt, endAt);
  const prev = trailerValue(trailer, 'Prev');
  return { offset, entries, trailer, prev: prev === undefined ? undefined : Number(prev) };
}

export function readStructure(pdf: Buffer): PdfStructure {
  const text = pdf.toString('latin1');
  const sections: XrefSection[] = [];
  let at: number | undefined = lastStartXref(text);
  const seen = new Set<number>();
  while (at !== undefined) {
    if (seen.has(at) || sections.length >= MAX_SECTIONS) throw new Error('xref /Prev chain loops or is too long');
    seen.add(at);
    const section = readSection(text, at);
    sections.push(section);
    at = section.prev;
  }
  const offsets = new Map<number, number>();
  for (const s of [...sections].reverse()) for (const [n, o] of s.entries) offsets.set(n, o);
  const newest = sections[0].trailer;
  const rootRef = trailerValue(newest, 'Root');
  if (!rootRef) throw new Error('trailer names no /Root');
  return {
    sections,
    offsets,
    size: Number(trailerValue(newest, 'Size') ?? 0),
    rootRef,
    infoRef: trailerValue(newest, 'Info'),
    // pdfkit writes /ID; the signing placeholder's update drops it, so carry the newest one forward.
    id: sections.map((s) => /\/ID\s*(\[[^\]]*\])/.exec(s.trailer)?.[1]).find((x) => x !== undefined),
  };
}

export function refNumber(ref: string): number {
  return Number(/^(\d+)/.exec(ref.trim())![1]);
}

/** The text between `N G obj` and `endobj` of the object at `offset` (dictionaries only; streams are cut at `stream`). */
export function objectAt(pdf: Buffer, offset: number): { number: number; body: string } {
  const head = /^(\d+)\s+(\d+)\s+obj\s*/.exec(pdf.subarray(offset, offset + 40).toString('latin1'));
  if (!head) throw new Error(`no object at offset ${offset}`);
  const start = offset + head[0].length;
  const end = pdf.indexOf('endobj', start, 'latin1');
  if (end === -1) throw new Error(`object at ${offset} has no endobj`);
  let body = pdf.subarray(start, end).toString('latin1');
  const stream = body.search(/\bstream\r?\n/);
  if (stream !== -1) body = body.slice(0, stream);
  return { number: Number(head[1]), body: body.trim() };
}

export function objectBody(pdf: Buffer, structure: PdfStructure, num: number): string {
  const offset = structure.offsets.get(num);
  if (offset === undefined) throw new Error(`object ${num} is not in the cross-reference table`);
  return objectAt(pdf, offset).body;
}

/** Adds `entries` before the closing `>>` of a dictionary's text. */
export function addToDictionary(dict: string, entries: string): string {
  const end = dict.lastIndexOf('>>');
  if (end === -1) throw new Error('not a dictionary');
  return `${dict.slice(0, end).trimEnd()}\n${entries}\n>>`;
}

/** Appends `refs` to the array value of `key` (creating the key when absent). */
export function appendToArray(dict: string, key: string, refs: string[]): string {
  const re = new RegExp(`/${key}\\s*\\[([^\\]]*)\\]`);
  if (re.test(dict)) return dict.replace(re, (_m, inner: string) => `/${key} [${`${inner.trim()} ${refs.join(' ')}`.trim()}]`);
  return addToDictionary(dict, `/${key} [${refs.join(' ')}]`);
}

export interface NewObject {
  number: number;
  /** Dictionary text, or a stream: dictionary (without /Length) and data. */
  body: string | { dict: string; data: Buffer };
}

/** Appends the objects, a cross-reference section for them and a trailer with /Prev (ISO 32000-1 7.5.6). */
export function appendIncrementalUpdate(pdf: Buffer, structure: PdfStructure, objects: NewObject[]): Buffer {
  const parts: Buffer[] = [pdf];
  let length = pdf.length;
  const push = (b: Buffer) => {
    parts.push(b);
    length += b.length;
  };
  if (pdf[pdf.length - 1] !== 0x0a) push(Buffer.from('\n'));
  const offsets = new Map<number, number>();
  for (const obj of [...objects].sort((a, b) => a.number - b.number)) {
    offsets.set(obj.number, length);
    if (typeof obj.body === 'string') {
      push(Buffer.from(`${obj.number} 0 obj\n${obj.body}\nendobj\n`, 'latin1'));
    } else {
      push(Buffer.from(`${obj.number} 0 obj\n${addToDictionary(obj.body.dict, `/Length ${obj.body.data.length}`)}\nstream\n`, 'latin1'));
      push(obj.body.data);
      push(Buffer.from('\nendstream\nendobj\n', 'latin1'));
    }
  }
  const xrefOffset = length;
  const numbers = [...offsets.keys()].sort((a, b) => a - b);
  let xref = 'xref\n';
  for (let i = 0; i < numbers.length; ) {
    let j = i;
    while (j + 1 < numbers.length && numbers[j + 1] === numbers[j] + 1) j++;
    xref += `${numbers[i]} ${j - i + 1}\n`;
    for (let k = i; k <= j; k++) xref += `${String(offsets.get(numbers[k])).padStart(10, '0')} 00000 n \n`;
    i = j + 1;
  }
  const size = Math.max(structure.size, numbers[numbers.length - 1] + 1);
  const trailer = [`/Size ${size}`, `/Root ${structure.rootRef}`];
  if (structure.infoRef) trailer.push(`/Info ${structure.infoRef}`);
  if (structure.id) trailer.push(`/ID ${structure.id}`);
  trailer.push(`/Prev ${structure.sections[0].offset}`);
  push(Buffer.from(`${xref}trailer\n<<\n${trailer.join('\n')}\n>>\nstartxref\n${xrefOffset}\n%%EOF`, 'latin1'));
  return Buffer.concat(parts, length);
}

/** PDF date string (ISO 32000-1 7.9.4) in UTC. */
export function pdfDate(d: Date): string {
  return `D:${d.toISOString().replace(/[-:T]/g, '').slice(0, 14)}Z`;
}

const MAX_STREAM_BYTES = 8 * 1024 * 1024;

/** The dictionary and decoded data of the stream object at `offset` (no filter, or FlateDecode only). */
export function streamAt(pdf: Buffer, offset: number): { dict: string; data: Buffer } {
  const head = /^(\d+)\s+(\d+)\s+obj\s*/.exec(pdf.subarray(offset, offset + 40).toString('latin1'));
  if (!head) throw new Error(`no object at offset ${offset}`);
  const start = offset + head[0].length;
  const keyword = pdf.indexOf('stream', start, 'latin1');
  if (keyword === -1) throw new Error(`object at ${offset} is not a stream`);
  const dict = pdf.subarray(start, keyword).toString('latin1').trim();
  const length = Number(/\/Length\s+(\d+)(?!\s+\d+\s+R)/.exec(dict)?.[1] ?? NaN);
  if (!Number.isFinite(length) || length > MAX_STREAM_BYTES) throw new Error(`stream at ${offset} has no usable direct /Length`);
  let dataStart = keyword + 6;
  if (pdf[dataStart] === 0x0d) dataStart++;
  if (pdf[dataStart] === 0x0a) dataStart++;
  const raw = pdf.subarray(dataStart, dataStart + length);
  const filter = /\/Filter\s*(\/\w+|\[[^\]]*\])/.exec(dict)?.[1];
  if (!filter) return { dict, data: Buffer.from(raw) };
  if (filter.replace(/[[\]\s]/g, '') !== '/FlateDecode') throw new Error(`stream at ${offset} uses an unsupported filter ${filter}`);
  return { dict, data: inflateSync(raw, { maxOutputLength: MAX_STREAM_BYTES }) };
}

export function streamObject(pdf: Buffer, structure: PdfStructure, num: number): { dict: string; data: Buffer } {
  const offset = structure.offsets.get(num);
  if (offset === undefined) throw new Error(`object ${num} is not in the cross-reference table`);
  return streamAt(pdf, offset);
}

/** Object numbers referenced inside an array value `/Key [a 0 R b 0 R]`. */
export function arrayRefs(dict: string, key: string): number[] {
  const m = new RegExp(`/${key}\\s*\\[([^\\]]*)\\]`).exec(dict);
  return m ? [...m[1].matchAll(/(\d+)\s+\d+\s+R/g)].map((r) => Number(r[1])) : [];
}

export function dictRef(dict: string, key: string): number | undefined {
  const m = new RegExp(`/${key}\\s+(\\d+)\\s+\\d+\\s+R`).exec(dict);
  return m ? Number(m[1]) : undefined;
}
