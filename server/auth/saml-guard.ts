import { DOMParser, type Element } from '@xmldom/xmldom';
import { SaxesParser } from 'saxes';

// Checks on a posted SAML response that run BEFORE the signature library sees it. The signature checks select
// nodes with XPath, whose cost grows with the square of the element count; a response full of empty elements
// would hold the event loop for minutes. So the decoded XML is first scanned once, linearly, by a streaming
// tokenizer with hard limits, and refused on the first DTD, comment, CDATA section, processing instruction or
// limit crossed. Only then is it parsed into a DOM for the structural and policy checks below, and only after
// those does node-saml verify the signatures.
//
// Sources: OASIS SAML 2.0 Core (saml-core-2.0-os) §3.2.2 (Destination, Status), §2.3.3 (Issuer of an assertion);
// SAML 2.0 Profiles (saml-profiles-2.0-os) §4.1.4.2–4.1.4.3 (Issuer, InResponseTo, bearer confirmation);
// SAML 2.0 Bindings (saml-bindings-2.0-os) §3.5.5.2 (a signed HTTP-POST message carries Destination);
// RFC 6931 §2.1.3 / §2.3.2 and NIST SP 800-131A Rev. 2 §9 (SHA-1 not for digital signatures);
// OWASP XML External Entity Prevention Cheat Sheet (refuse DTDs). Refusing comments and CDATA is common practice
// after the NameID-truncation class of attacks (exclusive canonicalisation drops comments, so they are not signed).

export const SAML_LIMITS = {
  /** The callback's whole form body (base64 response + RelayState). */
  bodyBytes: 256 * 1024,
  /** Elements in the decoded response; a signed response with a dozen attributes has about 40. */
  elements: 1000,
  /** Nesting depth; a signed response nests about 8 deep (Response/Assertion/Signature/SignedInfo/Reference/Transforms/Transform/…). */
  depth: 24,
  /** Attributes on one element. */
  attributesPerElement: 32,
} as const;

export type SamlRefusalReason =
  | 'oversize' | 'body-malformed' | 'no-response' | 'not-base64' | 'xml-malformed' | 'dtd' | 'comment' | 'cdata'
  | 'processing-instruction' | 'too-many-elements' | 'too-deep' | 'too-many-attributes' | 'not-a-response'
  | 'wrapping' | 'signature-misplaced' | 'weak-algorithm' | 'destination' | 'issuer' | 'status'
  | 'in-response-to-missing' | 'request-not-bound' | 'unknown-request' | 'in-response-to' | 'signature-invalid'
  | 'time-window' | 'subject-confirmation' | 'audience' | 'recipient' | 'replay' | 'account-deactivated'
  | 'attributes' | 'saml-invalid';

/** A refused sign-in: `reason` goes to the security log, never into the response body. */
export class SamlRefusal extends Error {
  constructor(readonly reason: SamlRefusalReason, readonly detail: string) {
    super(detail);
  }
}

const NS = {
  protocol: 'urn:oasis:names:tc:SAML:2.0:protocol',
  assertion: 'urn:oasis:names:tc:SAML:2.0:assertion',
  dsig: 'http://www.w3.org/2000/09/xmldsig#',
} as const;
const SUCCESS = 'urn:oasis:names:tc:SAML:2.0:status:Success';

/** Signature and digest algorithms accepted (RSA with SHA-2 only; no SHA-1, no HMAC). */
export const allowedSignatureAlgorithms: ReadonlySet<string> = new Set([
  'http://www.w3.org/2001/04/xmldsig-more#rsa-sha256',
  'http://www.w3.org/2001/04/xmldsig-more#rsa-sha512',
]);
export const allowedDigestAlgorithms: ReadonlySet<string> = new Set([
  'http://www.w3.org/2001/04/xmlenc#sha256',
  'http://www.w3.org/2001/04/xmlenc#sha512',
]);

/** Decodes base64 strictly: anything but the base64 alphabet (and line breaks) is refused. */
export function decodeSamlResponse(value: unknown): string {
  if (typeof value !== 'string' || value.length === 0) throw new SamlRefusal('no-response', 'SAMLResponse missing or empty');
  const compact = value.replace(/\s+/g, '');
  if (!/^[A-Za-z0-9+/]+={0,2}$/.test(compact) || compact.length % 4 !== 0) throw new SamlRefusal('not-base64', 'SAMLResponse is not base64');
  return Buffer.from(compact, 'base64').toString('utf8');
}

/** One linear pass over the XML with a streaming tokenizer: limits, and no DTD, comment, CDATA or PI. */
export function scanSamlXml(xml: string, limits: { elements: number; depth: number; attributesPerElement: number } = SAML_LIMITS): void {
  const parser = new SaxesParser({ xmlns: false, position: false });
  let elements = 0;
  let depth = 0;
  parser.on('error', (e) => {
    throw e instanceof SamlRefusal ? e : new SamlRefusal('xml-malformed', e.message);
  });
  parser.on('doctype', () => {
    throw new SamlRefusal('dtd', 'document type declarations are refused');
  });
  parser.on('comment', () => {
    throw new SamlRefusal('comment', 'comments are refused');
  });
  parser.on('cdata', () => {
    throw new SamlRefusal('cdata', 'CDATA sections are refused');
  });
  parser.on('processinginstruction', () => {
    throw new SamlRefusal('processing-instruction', 'processing instructions are refused');
  });
  parser.on('opentagstart', () => {
    elements++;
    depth++;
    if (elements > limits.elements) throw new SamlRefusal('too-many-elements', `more than ${limits.elements} elements`);
    if (depth > limits.depth) throw new SamlRefusal('too-deep', `nested deeper than ${limits.depth}`);
  });
  let attributes = 0;
  parser.on('attribute', () => {
    attributes++;
    if (attributes > limits.attributesPerElement) throw new SamlRefusal('too-many-attributes', `more than ${limits.attributesPerElement} attributes on one element`);
  });
  parser.on('opentag', (tag) => {
    attributes = 0;
    if (tag.isSelfClosing) depth--;
  });
  parser.on('closetag', (tag) => {
    if (!tag.isSelfClosing) depth--;
  });
  try {
    parser.write(xml).close();
  } catch (e) {
    if (e instanceof SamlRefusal) throw e;
    throw new SamlRefusal('xml-malformed', (e as Error).message);
  }
  if (elements === 0) throw new SamlRefusal('xml-malformed', 'no root element');
}

const childElements = (el: Element): Element[] => {
  const out: Element[] = [];
  for (let n = el.firstChild; n; n = n.nextSibling) if (n.nodeType === 1) out.push(n as Element);
  return out;
};
const is = (el: Element | null | undefined, ns: string, local: string) => !!el && el.namespaceURI === ns && el.localName === local;
const allElements = (root: Element): Element[] => {
  const out: Element[] = [];
  const stack: Element[] = [root];
  while (stack.length) {
    const el = stack.pop()!;
    out.push(el);
    const kids = childElements(el);
    for (let i = kids.length - 1; i >= 0; i--) stack.push(kids[i]);
  }
  return out;
};
const textOf = (el: Element): string => {
  let s = '';
  for (let n = el.firstChild; n; n = n.nextSibling) {
    if (n.nodeType !== 3) throw new SamlRefusal('saml-invalid', `${el.localName} has mixed content`);
    s += n.nodeValue ?? '';
  }
  return s.trim();
};

export type InspectedResponse = { inResponseTo: string; assertionId: string };

/**
 * Structural and policy checks on a response that passed the scan (bounded size, so a DOM is cheap):
 * exactly one assertion, a direct child of the Response; signatures only on the Response and the Assertion,
 * each with one reference to its parent and SHA-2 algorithms; unique IDs; Destination, Issuer and Status as
 * the profile requires; an InResponseTo (no unsolicited responses).
 */
export function inspectSamlResponse(xml: string, expect: { destination: string; idpIssuer: string }): InspectedResponse {
  let fatal: string | null = null;
  const doc = new DOMParser({
    onError: (level, msg) => {
      if (level !== 'warning') fatal ??= msg;
    },
  }).parseFromString(xml, 'text/xml');
  if (fatal) throw new SamlRefusal('xml-malformed', fatal);
  const root = doc.documentElement;
  if (!root || !is(root, NS.protocol, 'Response')) throw new SamlRefusal('not-a-response', `root element is ${root?.localName ?? 'missing'}`);
  if (root.getAttribute('Version') !== '2.0') throw new SamlRefusal('saml-invalid', 'Version is not 2.0');

  const every = allElements(root);
  const ids = new Set<string>();
  for (const el of every) {
    const id = el.getAttribute('ID');
    if (!id) continue;
    if (ids.has(id)) throw new SamlRefusal('wrapping', `ID ${id} occurs twice`);
    ids.add(id);
  }
  const assertions = every.filter((el) => el.localName === 'Assertion' || el.localName === 'EncryptedAssertion');
  if (assertions.length !== 1) throw new SamlRefusal('wrapping', `${assertions.length} assertions in the response`);
  const assertion = assertions[0];
  if (!is(assertion, NS.assertion, 'Assertion') || assertion.parentNode !== root) throw new SamlRefusal('wrapping', 'the assertion is not a direct child of the response');
  const nestedResponses = every.filter((el) => el !== root && el.localName === 'Response');
  if (nestedResponses.length) throw new SamlRefusal('wrapping', 'a response nested inside the response');

  for (const sig of every.filter((el) => el.localName === 'Signature')) {
    const parent = sig.parentNode as Element | null;
    if (!is(sig, NS.dsig, 'Signature') || (parent !== root && parent !== assertion)) throw new SamlRefusal('signature-misplaced', `a signature inside ${parent?.localName ?? 'nothing'}`);
    const inner = allElements(sig);
    if (inner.some((el) => el.localName === 'Object')) throw new SamlRefusal('wrapping', 'a signature carries an Object');
    const methods = inner.filter((el) => el.localName === 'SignatureMethod').map((el) => el.getAttribute('Algorithm') ?? '');
    const digests = inner.filter((el) => el.localName === 'DigestMethod').map((el) => el.getAttribute('Algorithm') ?? '');
    for (const a of methods) if (!allowedSignatureAlgorithms.has(a)) throw new SamlRefusal('weak-algorithm', `signature algorithm ${a}`);
    for (const a of digests) if (!allowedDigestAlgorithms.has(a)) throw new SamlRefusal('weak-algorithm', `digest algorithm ${a}`);
    const refs = inner.filter((el) => el.localName === 'Reference');
    if (methods.length !== 1 || refs.length !== 1) throw new SamlRefusal('signature-invalid', 'a signature must have one method and one reference');
    if (refs[0].getAttribute('URI') !== `#${parent!.getAttribute('ID') ?? ''}`) throw new SamlRefusal('signature-invalid', 'a signature references another element');
  }
  const sigsOn = (el: Element) => childElements(el).filter((c) => is(c, NS.dsig, 'Signature')).length;
  if (sigsOn(root) > 1 || sigsOn(assertion) > 1) throw new SamlRefusal('wrapping', 'more than one signature on one element');

  if (root.getAttribute('Destination') !== expect.destination) throw new SamlRefusal('destination', `Destination is '${root.getAttribute('Destination') ?? ''}'`);

  const responseIssuer = childElements(root).find((c) => is(c, NS.assertion, 'Issuer'));
  if (responseIssuer && textOf(responseIssuer) !== expect.idpIssuer) throw new SamlRefusal('issuer', `response Issuer is '${textOf(responseIssuer)}'`);
  const assertionIssuer = childElements(assertion).find((c) => is(c, NS.assertion, 'Issuer'));
  if (!assertionIssuer || textOf(assertionIssuer) !== expect.idpIssuer) throw new SamlRefusal('issuer', `assertion Issuer is '${assertionIssuer ? textOf(assertionIssuer) : ''}'`);

  const status = childElements(root).find((c) => is(c, NS.protocol, 'Status'));
  const statusCode = status ? childElements(status).find((c) => is(c, NS.protocol, 'StatusCode')) : undefined;
  if (statusCode?.getAttribute('Value') !== SUCCESS) throw new SamlRefusal('status', `status is '${statusCode?.getAttribute('Value') ?? 'missing'}'`);

  const inResponseTo = root.getAttribute('InResponseTo');
  if (!inResponseTo) throw new SamlRefusal('in-response-to-missing', 'unsolicited response (no InResponseTo)');
  return { inResponseTo, assertionId: assertion.getAttribute('ID') ?? '' };
}

/** Maps node-saml's error messages to reason codes for the security log. */
export function reasonFromLibraryError(err: Error): SamlRefusalReason {
  if (err instanceof SamlRefusal) return err.reason;
  const m = err.message;
  if (/InResponseTo/i.test(m)) return /does not match/i.test(m) ? 'in-response-to' : 'unknown-request';
  if (/signature/i.test(m)) return 'signature-invalid';
  if (/not yet valid|expired|clock/i.test(m)) return 'time-window';
  if (/subject confirmation/i.test(m)) return 'subject-confirmation';
  if (/audience/i.test(m)) return 'audience';
  return 'saml-invalid';
}
