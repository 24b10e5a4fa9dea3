import { createHash } from 'node:crypto';
import { srgbIccProfile } from './srgb-icc';

// The PDF/A-3b parts of a certificate (ISO 19005-3:2012), added to a pdfkit document before it ends:
//  - an output intent GTS_PDFA1 with an embedded sRGB ICC profile (6.2.3);
//  - XMP metadata with pdfaid:part 3 and conformance B, and the document information mirrored (6.6.2, 6.6.4);
//  - embedded files with a file specification carrying /AFRelationship, listed in the catalogue's /AF
//    array (6.8 and Annex E), so the snapshot JSON and the result CSV travel inside the signed file.
// The fonts are already embedded (Noto Sans, subset) by the renderer.

type Doc = PDFKit.PDFDocument;

interface PdfkitRef {
  data: Record<string, unknown>;
  compress: boolean;
  end(chunk?: Buffer | string): void;
}

interface PdfkitInternals {
  ref(data: Record<string, unknown>): PdfkitRef;
  _root: { data: Record<string, unknown> & { Names: PdfkitRef } };
}

export interface EmbeddedAttachment {
  name: string;
  /** MIME type, written as the stream's /Subtype name. */
  mime: string;
  description: string;
  /** ISO 19005-3 Annex E / ISO 32000-2 7.11.3: how the file relates to the document. */
  relationship: 'Source' | 'Data' | 'Supplement' | 'Alternative';
  data: Buffer;
}

export interface ArchivalInfo {
  title: string;
  author: string;
  subject: string;
  keywords: string;
  creator: string;
  producer: string;
  created: Date;
  attachments: EmbeddedAttachment[];
}

/** A PDF name with the characters outside the regular set written as #xx (ISO 32000-1 7.3.5). */
function pdfName(value: string): string {
  return value.replace(/[^A-Za-z0-9.\-_+]/g, (c) => `#${c.charCodeAt(0).toString(16).padStart(2, '0')}`);
}

function xmlEscape(s: string): string {
  return s.replace(/&/g, '&amp;').replace(/</g, '&lt;').replace(/>/g, '&gt;').replace(/"/g, '&quot;');
}

export const XMP_PACKET_END = '<?xpacket end="w"?>';

/** XMP (ISO 16684-1) with the properties ISO 19005-3 6.6.2.3.1 asks to match the information dictionary. */
export function xmpMetadata(info: Omit<ArchivalInfo, 'attachments'>): string {
  const date = info.created.toISOString().replace(/\.\d{3}Z$/, 'Z');
  return `<?xpacket begin="\uFEFF" id="W5M0MpCehiHzreSzNTczkc9d"?>
<x:xmpmeta xmlns:x="adobe:ns:meta/">
 <rdf:RDF xmlns:rdf="http://www.w3.org/1999/02/22-rdf-syntax-ns#">
  <rdf:Description rdf:about="" xmlns:pdfaid="http://www.aiim.org/pdfa/ns/id/">
   <pdfaid:part>3</pdfaid:part>
   <pdfaid:conformance>B</pdfaid:conformance>
  </rdf:Description>
  <rdf:Description rdf:about="" xmlns:dc="http://purl.org/dc/elements/1.1/">
   <dc:format>application/pdf</dc:format>
   <dc:title><rdf:Alt><rdf:li xml:lang="x-default">${xmlEscape(info.title)}</rdf:li></rdf:Alt></dc:title>
   <dc:creator><rdf:Seq><rdf:li>${xmlEscape(info.author)}</rdf:li></rdf:Seq></dc:creator>
   <dc:description><rdf:Alt><rdf:li xml:lang="x-default">${xmlEscape(info.subject)}</rdf:li></rdf:Alt></dc:description>
  </rdf:Description>
  <rdf:Description rdf:about="" xmlns:xmp="http://ns.adobe.com/xap/1.0/">
   <xmp:CreatorTool>${xmlEscape(info.creator)}</xmp:CreatorTool>
   <xmp:CreateDate>${date}</xmp:CreateDate>
   <xmp:ModifyDate>${date}</xmp:ModifyDate>
   <xmp:MetadataDate>${date}</xmp:MetadataDate>
  </rdf:Description>
  <rdf:Description rdf:about="" xmlns:pdf="http://ns.adobe.com/pdf/1.3/">
   <pdf:Producer>${xmlEscape(info.producer)}</pdf:Producer>
   <pdf:Keywords>${xmlEscape(info.keywords)}</pdf:Keywords>
  </rdf:Description>
 </rdf:RDF>
</x:xmpmeta>
${' '.repeat(100)}
${XMP_PACKET_END}`;
}

export function addArchivalParts(doc: Doc, info: ArchivalInfo): void {
  const pdf = doc as unknown as PdfkitInternals;
  const root = pdf._root.data;

  const metadata = pdf.ref({ Type: 'Metadata', Subtype: 'XML' });
  // ISO 19005-3 6.6.2.1 (as in PDF/A-1): the metadata stream is left unfiltered, readable without a decoder.
  metadata.compress = false;
  metadata.end(Buffer.from(xmpMetadata(info), 'utf8'));
  root.Metadata = metadata;

  const icc = pdf.ref({ N: 3 });
  icc.end(srgbIccProfile());
  const intent = pdf.ref({
    Type: 'OutputIntent', S: 'GTS_PDFA1',
    OutputConditionIdentifier: new String('sRGB IEC61966-2.1'), Info: new String('sRGB IEC61966-2.1'),
    RegistryName: new String('http://www.color.org'), DestOutputProfile: icc,
  });
  intent.end();
  root.OutputIntents = [intent];

  const specs: [string, PdfkitRef][] = [];
  for (const a of info.attachments) {
    const file = pdf.ref({
      Type: 'EmbeddedFile', Subtype: pdfName(a.mime),
      Params: { Size: a.data.length, ModDate: info.created, CheckSum: createHash('md5').update(a.data).digest() },
    });
    file.end(a.data);
    const spec = pdf.ref({
      Type: 'Filespec', F: new String(a.name), UF: new String(a.name), Desc: new String(a.description),
      AFRelationship: a.relationship, EF: { F: file, UF: file },
    });
    spec.end();
    specs.push([a.name, spec]);
  }
  if (specs.length) {
    specs.sort(([x], [y]) => (x < y ? -1 : x > y ? 1 : 0));
    const tree = pdf.ref({ Names: specs.flatMap(([name, spec]) => [new String(name), spec]) });
    tree.end();
    pdf._root.data.Names.data.EmbeddedFiles = tree;
    root.AF = specs.map(([, spec]) => spec);
  }
}
