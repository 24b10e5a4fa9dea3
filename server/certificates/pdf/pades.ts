import { plainAddPlaceholder } from '@signpdf/placeholder-plain';
import { SignPdf, Signer } from '@signpdf/signpdf';
import { addSignatureTimeStamp, createSignedData, signatureValue, signedDataToDer, type CmsSigner } from '../pki/cms';
import { certificateDer, OID, sha256 } from '../pki/der';
import { certificatesOfToken, requestTimeStamp } from '../pki/tsp';
import { addToDictionary, appendIncrementalUpdate, appendToArray, objectBody, pdfDate, readStructure, refNumber, type NewObject } from './incremental';

// PAdES signatures (ETSI EN 319 142-1 V1.1.1):
//  - B-B/B-T: a CAdES detached CMS (/SubFilter /ETSI.CAdES.detached, 6.3 table 1) with content-type,
//    message-digest and signing-certificate-v2 signed attributes (5.2), the claimed time in /M and no
//    signing-time attribute, plus an RFC 3161 signature time-stamp as unsigned attribute (5.3);
//  - B-LT: a document security store /DSS with the certificates and CRLs needed to validate it (5.4.2),
//    added in an incremental update after the signature;
//  - B-LTA: a document time-stamp (/Type /DocTimeStamp, /SubFilter /ETSI.RFC3161, 5.4.3 and ISO 32000-2
//    12.8.5) over the whole file, DSS included.
// @signpdf places the first signature's dictionary and fills both /ByteRange gaps.

export interface PadesMaterial {
  signer: CmsSigner;
  tsaUrl: string;
  /**
   * Validation data for the DSS, asked for once the signature is made: the certificates (the signer's chain
   * and the TSA's) and the CRLs (the institute root's, issued after the signature, and the TSA's), all DER.
   */
  validationData: (tsaCertificates: Buffer[]) => Promise<{ certificates: Buffer[]; crls: Buffer[] }>;
}

export interface PadesOptions {
  reason: string;
  location: string;
  name: string;
  contactInfo?: string;
  /** The claimed signing time, recorded as /M; the trusted time comes from the time-stamp. */
  signingTime?: Date;
}

/** Room for the CMS blob: RSA-3072 signature, two certificates and a time-stamp token with two more. */
const SIGNATURE_LENGTH_BYTES = 16384;
const DOC_TIMESTAMP_LENGTH_BYTES = 8192;
const PLACEHOLDER = '**********';

class CadesSigner extends Signer {
  token?: Buffer;

  constructor(private readonly material: PadesMaterial) {
    super();
  }

  override async sign(signedBytes: Buffer): Promise<Buffer> {
    const signedData = await createSignedData({ signer: this.material.signer, digest: sha256(signedBytes), eContentType: OID.data });
    const token = await requestTimeStamp(this.material.tsaUrl, sha256(signatureValue(signedData)));
    addSignatureTimeStamp(signedData, token);
    this.token = token;
    return signedDataToDer(signedData);
  }
}

class DocumentTimeStampSigner extends Signer {
  constructor(private readonly tsaUrl: string) {
    super();
  }

  override async sign(signedBytes: Buffer): Promise<Buffer> {
    return requestTimeStamp(this.tsaUrl, sha256(signedBytes));
  }
}

/**
 * Appends the DSS and a document time-stamp placeholder in one incremental update: new streams for each
 * certificate and CRL, the /DSS dictionary, the time-stamp's signature field and widget, and new versions of
 * the catalogue (/DSS, the PAdES extension), the AcroForm (/Fields) and the first page (/Annots).
 */
function appendDssAndTimeStampPlaceholder(pdf: Buffer, certificates: Buffer[], crls: Buffer[], now: Date): Buffer {
  const structure = readStructure(pdf);
  const rootNumber = refNumber(structure.rootRef);
  let catalog = objectBody(pdf, structure, rootNumber);
  const acroFormRef = /\/AcroForm\s+(\d+\s+\d+\s+R)/.exec(catalog)?.[1];
  if (!acroFormRef) throw new Error('the signed PDF has no AcroForm');
  const acroFormNumber = refNumber(acroFormRef);
  const acroForm = objectBody(pdf, structure, acroFormNumber);
  const signatureWidget = /\/Fields\s*\[\s*(\d+)\s+\d+\s+R/.exec(acroForm)?.[1];
  const pageRef = signatureWidget ? /\/P\s+(\d+\s+\d+\s+R)/.exec(objectBody(pdf, structure, Number(signatureWidget)))?.[1] : undefined;
  if (!pageRef) throw new Error('the signature widget names no page');
  const pageNumber = refNumber(pageRef);
  const page = objectBody(pdf, structure, pageNumber);

  let next = structure.size;
  const objects: NewObject[] = [];
  const stream = (data: Buffer) => {
    const number = next++;
    objects.push({ number, body: { dict: '<< >>', data } });
    return `${number} 0 R`;
  };
  const certRefs = certificates.map(stream);
  const crlRefs = crls.map(stream);
  const dssNumber = next++;
  objects.push({ number: dssNumber, body: `<<\n/Type /DSS\n/Certs [${certRefs.join(' ')}]\n/CRLs [${crlRefs.join(' ')}]\n>>` });

  const sigNumber = next++;
  const widgetNumber = next++;
  const zeros = '0'.repeat(DOC_TIMESTAMP_LENGTH_BYTES * 2);
  objects.push({
    number: sigNumber,
    body: `<<\n/Type /DocTimeStamp\n/Filter /Adobe.PPKLite\n/SubFilter /ETSI.RFC3161\n/ByteRange [0 /${PLACEHOLDER} /${PLACEHOLDER} /${PLACEHOLDER}]\n/Contents <${zeros}>\n/M (${pdfDate(now)})\n>>`,
  });
  objects.push({
    number: widgetNumber,
    body: `<<\n/Type /Annot\n/Subtype /Widget\n/FT /Sig\n/Rect [0 0 0 0]\n/V ${sigNumber} 0 R\n/T (DocumentTimeStamp1)\n/F 132\n/P ${pageRef}\n>>`,
  });
  catalog = catalog.replace(/\/DSS\s+\d+\s+\d+\s+R\s*/, '');
  if (!/\/Extensions\b/.test(catalog)) {
    // ETSI EN 319 142-1 5.4.1 recommends declaring the PAdES developer extension ESIC, level 5.
    catalog = addToDictionary(catalog, '/Extensions << /ESIC << /BaseVersion /1.7 /ExtensionLevel 5 >> >>');
  }
  catalog = addToDictionary(catalog, `/DSS ${dssNumber} 0 R`);
  objects.push({ number: rootNumber, body: catalog });
  objects.push({ number: acroFormNumber, body: appendToArray(acroForm, 'Fields', [`${widgetNumber} 0 R`]) });
  objects.push({ number: pageNumber, body: appendToArray(page, 'Annots', [`${widgetNumber} 0 R`]) });
  return appendIncrementalUpdate(pdf, structure, objects);
}

/** Signs at PAdES baseline B-LTA: CAdES signature with time-stamp, then DSS and document time-stamp. */
export async function signPades(pdf: Buffer, material: PadesMaterial, options: PadesOptions): Promise<Buffer> {
  const signingTime = options.signingTime ?? new Date();
  const withPlaceholder = plainAddPlaceholder({
    pdfBuffer: pdf,
    reason: options.reason,
    location: options.location,
    name: options.name,
    contactInfo: options.contactInfo ?? '',
    signingTime,
    signatureLength: SIGNATURE_LENGTH_BYTES,
    subFilter: 'ETSI.CAdES.detached',
    appName: 'Chronolevel',
  });
  const signer = new CadesSigner(material);
  const signed = await new SignPdf().sign(withPlaceholder, signer);
  const tsaCertificates = certificatesOfToken(signer.token!).map(certificateDer);
  const { certificates, crls } = await material.validationData(tsaCertificates);
  const unique = [...new Map(certificates.map((c) => [c.toString('base64'), c])).values()];
  return addLongTermValidation(signed, material.tsaUrl, unique, crls);
}

/** B-LT and B-LTA: appends the DSS with `certificates` and `crls`, then the document time-stamp from `tsaUrl`. */
export async function addLongTermValidation(signed: Buffer, tsaUrl: string, certificates: Buffer[], crls: Buffer[]): Promise<Buffer> {
  const withDss = appendDssAndTimeStampPlaceholder(signed, certificates, crls, new Date());
  return new SignPdf().sign(withDss, new DocumentTimeStampSigner(tsaUrl));
}
