import { chainCertificateSnapshotSchema, type ChainCertificateSnapshot } from '../../../shared/certificates';
import {
  buildCertificatePdf, CONTENT_WIDTH, COLOUR, coverageNote, drawQrCode, drawResultPanel, Flow, FONT, keyValues, MARGIN, measure, paragraph, put,
  reviewSection, sectionHeading, signatureBlock, STANDING_CAUTIONS, table, unitCell, type Doc,
} from './render-certificate';
import { formatFixed, formatScientific, formatValueWithUncertainty, groupHex } from './number-format';

// Renders a chain certificate snapshot to an unsigned A4 PDF with the same shell, fonts, number format, archival parts
// and layout rules as a campaign certificate (render-certificate.ts): the chain's result, the campaigns it is built
// from, the transportable clock's deployments, why its systematic offset cancels (or does not), the transport term,
// the chain budget, tides, method and cautions.

const roleLabel = new Map<ChainCertificateSnapshot['campaigns'][number]['role'], string>([
  ['remote', 'remote'],
  ['side-by-side-before', 'side by side, before'],
  ['side-by-side-after', 'side by side, after'],
]);

/** Signs the embedded Noto Sans has no glyph for, in words or ASCII (the attached snapshot keeps the originals). */
const NO_GLYPH: [RegExp, string][] = [[/∞/g, 'infinite'], [/≈/g, 'about'], [/√/g, 'sqrt'], [/↔/g, '–'], [/≤/g, '<='], [/≥/g, '>='], [/→/g, 'to'], [/∂/g, 'd']];
const printableText = (t: string) => NO_GLYPH.reduce((x, [re, by]) => x.replace(re, by), t);
function printable<T>(v: T): T {
  if (typeof v === 'string') return printableText(v) as T;
  if (Array.isArray(v)) return v.map(printable) as T;
  if (v && typeof v === 'object') return Object.fromEntries(Object.entries(v).map(([k, x]) => [k, printable(x)])) as T;
  return v;
}

const utc = (iso: string) => iso.replace('T', ' ').replace(/:\d{2}(\.\d+)?Z$/, ' UTC');
const day = (iso: string) => iso.slice(0, 10);

function titleBlock(flow: Flow, s: ChainCertificateSnapshot): void {
  const { doc } = flow;
  const qrSize = 92;
  const textWidth = CONTENT_WIDTH - qrSize - 18;
  const top = flow.y;
  let y = top;
  y += put(doc, 'CHRONOLEVEL  ·  CERTIFICATE OF A CALIBRATION CHAIN', MARGIN.left, y, textWidth, { size: 7.5, colour: COLOUR.slate, lineGap: 0 }) + 6;
  y += put(doc, 'Geopotential difference from a transportable-clock calibration chain', MARGIN.left, y, textWidth, { font: FONT.semi, size: 17, lineGap: 0 }) + 8;
  y += put(doc, s.certificateNumber, MARGIN.left, y, textWidth, { font: FONT.semi, size: 13, colour: COLOUR.teal, lineGap: 0 }) + 3;
  y += put(doc, `Chain certificate  ·  revision ${s.revision}  ·  issued ${day(s.issueDate)}  ·  by ${s.issuingInstitute}`, MARGIN.left, y, textWidth, { size: 9, colour: COLOUR.slate }) + 2;
  y += put(doc, `Chain: ${s.chain.name}`, MARGIN.left, y, textWidth, { size: 9 }) + 2;
  y += put(doc, `Participants: ${s.participants.join('; ')}`, MARGIN.left, y, textWidth, { size: 9, colour: COLOUR.slate });
  drawQrCode(doc, s.verificationUrl, MARGIN.left + CONTENT_WIDTH - qrSize, top, qrSize);
  const capH = put(doc, 'Scan to verify this file', MARGIN.left + CONTENT_WIDTH - qrSize, top + qrSize + 2, qrSize, { size: 6.5, colour: COLOUR.slate, align: 'center', lineGap: 0 });
  flow.y = Math.max(y, top + qrSize + 2 + capH) + 14;
}

function resultPanel(flow: Flow, s: ChainCertificateSnapshot): void {
  const ba = s.beforeAfter;
  const cells: { label: string; value: string; note: string; alert?: boolean }[] = [
    {
      label: `Geopotential difference ΔC = C(${s.toSite}) − C(${s.fromSite})`,
      value: `${formatValueWithUncertainty(s.deltaC_m2s2.value, s.deltaC_m2s2.expandedUncertainty)} m²/s²`,
      note: `expanded uncertainty U, ${coverageNote(s.deltaC_m2s2)}; u_c = ${formatScientific(s.deltaC_m2s2.standardUncertainty, 2)} m²/s²`,
    },
    {
      label: 'Normal-height difference ΔH = H(to) − H(from)',
      value: `${formatValueWithUncertainty(s.deltaH_m.value, s.deltaH_m.expandedUncertainty)} m`,
      note: `expanded uncertainty U, ${coverageNote(s.deltaH_m)}; u_c = ${formatScientific(s.deltaH_m.standardUncertainty, 2)} m`,
    },
    {
      label: 'Chain offset y_remote − ȳ_side-by-side',
      value: formatScientific(s.yChain, 5),
      note: `y_remote = ${formatScientific(s.yRemote, 6)}, ȳ_side-by-side = ${formatScientific(s.ySideBySide, 4)} (fractional, T relative to its partner)`,
    },
    ba
      ? {
        label: 'Before/after calibrations of T (Eₙ)',
        value: `Eₙ = ${formatFixed(ba.En, 2)}  ·  ${ba.agreed ? 'consistent' : 'NOT consistent'}`,
        note: `d = o_after − o_before = ${formatScientific(ba.difference, 2)}, U(d) = ${formatScientific(ba.expandedUncertainty, 2)} (k = 2, p about 95 %); criterion |Eₙ| not above 1`,
        alert: !ba.agreed,
      }
      : { label: 'Before/after calibrations of T', value: 'one calibration', note: 'no before/after check; the transport reproducibility was entered with its source' },
  ];
  drawResultPanel(flow, cells);
}

function bullets(flow: Flow, items: string[], size = 9): void {
  const { doc } = flow;
  for (const text of items) {
    const h = measure(doc, text, CONTENT_WIDTH - 14, { size });
    flow.ensure(h);
    doc.rect(MARGIN.left + 2, flow.y + 4, 3.5, 3.5).fill(COLOUR.teal);
    put(doc, text, MARGIN.left + 14, flow.y, CONTENT_WIDTH - 14, { size });
    flow.y += h + 4;
  }
}

function renderBody(doc: Doc, s: ChainCertificateSnapshot): void {
  const flow = new Flow(doc);
  titleBlock(flow, s);
  resultPanel(flow, s);
  let n = 0;

  sectionHeading(flow, ++n, 'Chain');
  keyValues(flow, [
    ['Transportable clock T', `${s.chain.transportableClock.name} (${s.chain.transportableClock.species}), ${s.chain.transportableClock.institute}`],
    ['Reference clock R', `${s.chain.referenceClock.name} (${s.chain.referenceClock.species}), ${s.chain.referenceClock.institute}`],
    ['From (partner’s site)', s.fromSite],
    ['To (T’s remote site)', s.toSite],
    ['Normal heights', s.deltaH_m.method],
    ...(s.chain.notes ? [['Notes', s.chain.notes] as [string, string]] : []),
  ]);

  sectionHeading(flow, ++n, 'Participating campaigns', 80);
  table(flow, [
    { header: 'Role', width: 58 },
    { header: 'Campaign', width: 112 },
    { header: 'Clocks A / B', width: 64 },
    { header: 'Sites A / B', width: 78 },
    { header: 'Period (UTC)', width: 54 },
    { header: 'y (u)', width: 72, align: 'right' },
    { header: 'T budget', width: CONTENT_WIDTH - 58 - 112 - 64 - 78 - 54 - 72 },
  ], s.campaigns.map((c) => [
    roleLabel.get(c.role) ?? c.role,
    `${c.label} (${c.state})`,
    `${c.clockA} / ${c.clockB} (T is ${c.transportableIs})`,
    `${c.siteA} / ${c.siteB}`,
    `${day(c.period.start)} to ${day(c.period.end)}`,
    `${formatScientific(c.y, 5)} (${formatScientific(c.standardUncertaintyY, 2)})`,
    `v${c.transportableBudgetVersion} (R: v${c.partnerBudgetVersion})`,
  ]), { size: 7.5 });
  const ties = s.campaigns.filter((c) => c.localTie);
  if (ties.length) {
    paragraph(flow, `y is the comparison’s tide-corrected fractional offset with its standard uncertainty u(y). Local ties of the side-by-side calibrations: ${ties.map((c) => `${roleLabel.get(c.role)}: ΔC_local = ${formatFixed(c.localTie!.deltaC_m2s2, 3)} m²/s², u = ${formatFixed(c.localTie!.standardUncertainty_m2s2, 3)} m²/s² (${c.localTie!.source})`).join('; ')}.`, { size: 8, colour: COLOUR.slate });
  }

  sectionHeading(flow, ++n, `Deployments of ${s.chain.transportableClock.name}`, 60);
  if (s.deployments.length) {
    table(flow, [
      { header: 'Site', width: 110 },
      { header: 'Arrival', width: 90 },
      { header: 'Departure', width: 90 },
      { header: 'Note', width: CONTENT_WIDTH - 290 },
    ], s.deployments.map((d) => [d.site, utc(d.arrivedAt), d.departedAt ? utc(d.departedAt) : 'still there', d.note || '—']), { size: 7.5 });
  } else {
    paragraph(flow, 'No deployment of the transportable clock is recorded over the chain’s period.', { colour: COLOUR.slate });
  }

  sectionHeading(flow, ++n, `Why ${s.chain.transportableClock.name}’s systematic offset ${s.cancellation.transportableCancels ? 'cancels' : 'does not cancel fully'}`);
  paragraph(flow, s.cancellation.statement);
  keyValues(flow, [['Budget versions of T pinned', s.cancellation.transportableBudgetVersions.map((v) => `v${v}`).join(', ')]]);

  sectionHeading(flow, ++n, 'Calibrations and transport reproducibility', 80);
  table(flow, [
    { header: 'Calibration', width: 120 },
    { header: 'calibrated offset o', width: 120, align: 'right' },
    { header: 'u(o), not shared', width: 120, align: 'right' },
    { header: 'weight', width: CONTENT_WIDTH - 360, align: 'right' },
  ], s.calibrations.map((c) => [c.which, formatScientific(c.offset, 4), formatScientific(c.unsharedUncertainty, 2), formatFixed(c.weight, 3)]));
  keyValues(flow, [
    ['Transport reproducibility u', `${formatScientific(s.transport.standardUncertainty, 2)} (fractional); in ΔC: c²·u = ${formatFixed(s.transport.standardUncertainty_m2s2, 3)} m²/s² (sensitivity c²)`],
    ['Where it comes from', s.transport.origin === 'entered' ? `entered with its source: ${s.transport.source}` : s.transport.source],
    ['Degrees of freedom ν', s.transport.degreesOfFreedom === null ? 'infinite (taken as exactly known)' : formatFixed(s.transport.degreesOfFreedom, 0)],
    ...(s.beforeAfter ? [['Before/after check', s.beforeAfter.statement] as [string, string]] : []),
  ]);

  sectionHeading(flow, ++n, 'Chain budget (GUM, shared inputs grouped)', 80);
  paragraph(flow, 'Every input of ΔC, with the campaigns it enters in brackets: an input that enters several comparisons is one quantity whose sensitivity cᵢ is the sum over the comparisons (JCGM 100:2008 §5.2.2, inputs with correlation +1). Contributions |cᵢ|·u(xᵢ) in m²/s², combined in quadrature; ν_eff by Welch–Satterthwaite (G.4.1); ν = inf. for type B inputs taken as exactly known.', { size: 8, colour: COLOUR.slate });
  const b = s.budget;
  const partOf = new Map(s.campaigns.map((c) => [c.label, c.role === 'remote' ? 'remote' : c.role === 'side-by-side-before' ? 'before' : 'after']));
  table(flow, [
    { header: 'Input', width: 170 },
    { header: 'Type', width: 28 },
    { header: 'u(xᵢ)', width: 56, align: 'right' },
    { header: 'Unit', width: 38 },
    { header: 'cᵢ (m²/s² per unit)', width: 70, align: 'right' },
    { header: '|cᵢ|·u(xᵢ) (m²/s²)', width: 70, align: 'right' },
    { header: 'ν', width: CONTENT_WIDTH - 170 - 28 - 56 - 38 - 70 - 70, align: 'right' },
  ], [
    ...b.rows.map((r) => [
      `${r.label} [${r.enters.map((e) => partOf.get(e) ?? e).join(', ') || 'chain'}]${r.cancels ? ' — cancels exactly' : ''}`,
      r.type,
      formatScientific(r.standardUncertainty, 2),
      unitCell(r.unit === 'm2/s2' ? 'm²/s²' : r.unit),
      formatScientific(r.sensitivity_m2s2, 4),
      formatScientific(r.contribution_m2s2, 2),
      r.degreesOfFreedom === null ? 'inf.' : formatFixed(r.degreesOfFreedom, 1),
    ]),
    ['Combined standard uncertainty u_c', '', '', '', '', formatScientific(b.combinedStandardUncertainty, 2), b.effectiveDegreesOfFreedom === null ? 'inf.' : formatFixed(b.effectiveDegreesOfFreedom, 1)],
    [`Expanded uncertainty U, ${coverageNote(b)}`, '', '', '', '', formatScientific(b.coverageFactor * b.combinedStandardUncertainty, 2), ''],
  ], { boldLastRows: 2, size: 7.5 });

  sectionHeading(flow, ++n, 'Tides and conventions');
  keyValues(flow, [
    ['Tide system', s.tideSystem],
    ['Tides applied', s.tides],
  ]);

  sectionHeading(flow, ++n, 'Method');
  paragraph(flow, s.method.statement);
  paragraph(flow, 'Published sources', { font: FONT.semi, size: 8.5 });
  s.method.sources.forEach((src, i) => {
    const h = measure(doc, src, CONTENT_WIDTH - 24, { size: 8.5 });
    flow.ensure(h);
    put(doc, `[${i + 1}]`, MARGIN.left, flow.y, 22, { size: 8.5, colour: COLOUR.slate });
    put(doc, src, MARGIN.left + 24, flow.y, CONTENT_WIDTH - 24, { size: 8.5 });
    flow.y += h + 3;
  });

  if (s.review) reviewSection(flow, ++n, s.review);

  sectionHeading(flow, ++n, 'Traceability');
  keyValues(flow, [
    ['Software version', s.softwareVersion],
    ['Audit-chain head at issue', groupHex(s.auditChainHead)],
  ], 164, 8);
  table(flow, [
    { header: 'Campaign', width: 230 },
    { header: 'Result used', width: CONTENT_WIDTH - 230 },
  ], s.campaigns.map((c) => [c.label, c.resultId]), { size: 8 });

  sectionHeading(flow, ++n, 'Assumptions');
  for (const a of s.assumptions) paragraph(flow, `• ${a}`, { size: 8.5 });

  // The cautions stay together on one page (with the heading), never one left behind.
  const cautions = [...STANDING_CAUTIONS, ...s.cautions.filter((c) => !/national datum authority/.test(c))];
  const cautionsHeight = cautions.reduce((sum, c) => sum + measure(doc, c, CONTENT_WIDTH - 14, { size: 9 }) + 4, 0);
  sectionHeading(flow, n + 1, 'Cautions', cautionsHeight);
  bullets(flow, cautions);

  signatureBlock(flow, s);
}

/** The chain's quantities as CSV (RFC 4180), the same columns as a campaign certificate's. */
export function chainResultCsv(s: ChainCertificateSnapshot): string {
  const field = (v: string | number | boolean | null) => {
    const t = v === null ? '' : String(v);
    return /[",\r\n]/.test(t) ? `"${t.replace(/"/g, '""')}"` : t;
  };
  const n = s.certificateNumber;
  const cov = (q: { coverageProbability: number; effectiveDegreesOfFreedom: number | null }) => `p = ${q.coverageProbability}, nu_eff = ${q.effectiveDegreesOfFreedom ?? 'infinite'}`;
  const rows: (string | number | boolean | null)[][] = [
    ['certificate', 'quantity', 'value', 'unit', 'expanded_uncertainty', 'coverage_factor', 'standard_uncertainty', 'note'],
    [n, 'geopotential_difference_deltaC', s.deltaC_m2s2.value, 'm2/s2', s.deltaC_m2s2.expandedUncertainty, s.deltaC_m2s2.coverageFactor, s.deltaC_m2s2.standardUncertainty, `${s.fromSite} to ${s.toSite}; ${cov(s.deltaC_m2s2)}`],
    [n, 'height_difference_deltaH', s.deltaH_m.value, 'm', s.deltaH_m.expandedUncertainty, s.deltaH_m.coverageFactor, s.deltaH_m.standardUncertainty, cov(s.deltaH_m)],
    [n, 'y_remote', s.yRemote, '1', '', '', '', 'T relative to its partner'],
    [n, 'y_side_by_side', s.ySideBySide, '1', '', '', '', 'weighted calibrated offset'],
    ...s.campaigns.map((c) => [n, `campaign:${c.role}`, c.y, '1', '', '', c.standardUncertaintyY, `${c.label}; T budget v${c.transportableBudgetVersion}`]),
    [n, 'transport_reproducibility', '', '1', '', '', s.transport.standardUncertainty, s.transport.source],
    ...(s.beforeAfter ? [[n, 'before_after_difference', s.beforeAfter.difference, '1', s.beforeAfter.expandedUncertainty, 2, s.beforeAfter.standardUncertainty, `En = ${s.beforeAfter.En}`]] : []),
    ...s.budget.rows.map((r) => [n, `budget:${r.label}`, r.contribution_m2s2, 'm2/s2', '', '', r.standardUncertainty, `type ${r.type}, unit of x ${r.unit}, sensitivity ${r.sensitivity_m2s2} m2/s2 per unit${r.cancels ? ', cancels' : ''}`]),
  ];
  return rows.map((r) => r.map(field).join(',')).join('\r\n') + '\r\n';
}

/** Renders a chain certificate as an unsigned PDF (the number in /CertificateNumber, as for every certificate). */
export async function renderChainCertificatePdf(input: ChainCertificateSnapshot): Promise<Buffer> {
  const s = chainCertificateSnapshotSchema.parse(input);
  return buildCertificatePdf({
    number: s.certificateNumber, issueDate: s.issueDate, issuingInstitute: s.issuingInstitute, softwareVersion: s.softwareVersion.split(',')[0],
    title: `Certificate ${s.certificateNumber}: geopotential difference from a calibration chain`,
    subject: `Chain certificate ${s.certificateNumber}: ${s.chain.name}`,
    keywords: `${s.certificateNumber}; chain certificate; chronometric levelling; transportable clock; geopotential difference`,
    snapshotJson: s, csv: chainResultCsv(s),
    body: (doc) => renderBody(doc, printable(s)),
  });
}
