import { createHash } from 'node:crypto';
import { arrayRefs, dictRef, objectBody, readStructure, streamObject } from './incremental';

// Reading the embedded files of a certificate (ISO 32000-1 7.11.4 embedded file streams, 7.9.6 name trees;
// /AF and /AFRelationship of ISO 19005-3 Annex E), from the revision the signature covers.

export interface ExtractedAttachment {
  name: string;
  mime: string | null;
  relationship: string | null;
  description: string | null;
  bytes: number;
  sha256: string;
  /** Listed in the catalogue's /AF array (associated file, ISO 19005-3 6.8). */
  associated: boolean;
  data: Buffer;
}

const MAX_ATTACHMENTS = 16;

function literal(dict: string, key: string): string | null {
  const m = new RegExp(`/${key}\\s*\\(((?:\\\\.|[^\\\\)])*)\\)`).exec(dict);
  if (!m) return null;
  const raw = m[1].replace(/\\([nrtbf()\\])/g, (_x, c: string) => ({ n: '\n', r: '\r', t: '\t', b: '\b', f: '\f' })[c as 'n'] ?? c);
  // UTF-16BE with a byte-order mark (ISO 32000-1 7.9.2.2), as pdfkit writes non-ASCII text.
  if (raw.startsWith('\u00fe\u00ff')) return Buffer.from(raw.slice(2), 'latin1').swap16().toString('utf16le');
  return raw;
}

function nameValue(dict: string, key: string): string | null {
  const m = new RegExp(`/${key}\\s*/([^\\s/<>\\[\\]()]+)`).exec(dict);
  return m ? m[1].replace(/#([0-9a-fA-F]{2})/g, (_x, h: string) => String.fromCharCode(parseInt(h, 16))) : null;
}

export function readAttachments(pdf: Buffer): ExtractedAttachment[] {
  const structure = readStructure(pdf);
  const catalog = objectBody(pdf, structure, Number(/^(\d+)/.exec(structure.rootRef)![1]));
  const namesRef = dictRef(catalog, 'Names');
  if (namesRef === undefined) return [];
  const treeRef = dictRef(objectBody(pdf, structure, namesRef), 'EmbeddedFiles');
  if (treeRef === undefined) return [];
  const associated = new Set(arrayRefs(catalog, 'AF'));
  const specs = arrayRefs(objectBody(pdf, structure, treeRef), 'Names');
  if (specs.length > MAX_ATTACHMENTS) throw new Error(`more than ${MAX_ATTACHMENTS} embedded files`);
  return specs.map((specNumber) => {
    const spec = objectBody(pdf, structure, specNumber);
    const ef = /\/EF\s*<<([^>]*)>>/.exec(spec)?.[1] ?? '';
    const fileRef = dictRef(ef, 'F') ?? dictRef(ef, 'UF');
    if (fileRef === undefined) throw new Error(`file specification ${specNumber} has no embedded file`);
    const { dict, data } = streamObject(pdf, structure, fileRef);
    return {
      name: literal(spec, 'UF') ?? literal(spec, 'F') ?? `attachment-${specNumber}`,
      mime: nameValue(dict, 'Subtype'),
      relationship: nameValue(spec, 'AFRelationship'),
      description: literal(spec, 'Desc'),
      bytes: data.length,
      sha256: createHash('sha256').update(data).digest('hex'),
      associated: associated.has(specNumber),
      data,
    };
  });
}
