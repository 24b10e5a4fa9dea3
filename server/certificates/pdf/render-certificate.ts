import PDFDocument from 'pdfkit';
import QRCode from 'qrcode';
import { parseCertificateSnapshot, type CertificateSnapshot } from './certificate-snapshot';
import { addArchivalParts } from './archival';
import { loadCertificateFonts } from './fonts';
import { resultCsv } from './result-csv';
import { coverageText } from '../../../shared/number-text';
import {
  formatFixed,
  formatScientific,
  formatValueWithUncertainty,
  groupHex,
  niceLinearTicks,
  superscriptInteger,
} from './number-format';

// Renders a certificate snapshot to an unsigned A4 PDF. Every block is measured (heightOfString)
// before it is placed, and a page is started when it would not fit, so text never overlaps; the
// footer with "page x of y" is drawn in a second pass over the buffered pages.

export type Doc = PDFKit.PDFDocument;

export const PAGE = { width: 595.28, height: 841.89 };
export const MARGIN = { top: 58, bottom: 70, left: 56, right: 56 };
export const CONTENT_WIDTH = PAGE.width - MARGIN.left - MARGIN.right;

export const COLOUR = {
  ink: '#1c2630',
  teal: '#0d5c63',
  slate: '#5d6b78',
  rule: '#cdd6dc',
  pale: '#e9f1f1',
  zebra: '#f4f6f7',
  alert: '#9b3d1c',
};

export const FONT = { regular: 'NotoSans', semi: 'NotoSans-SemiBold' };

/** Standing cautions printed on every certificate, whatever the campaign says. */
export const STANDING_CAUTIONS = [
  "Results are for scientific comparison; verify against your national datum authority and your lab's quality procedures.",
  'Uncertainties are expanded uncertainties U = k·u with the coverage factor k, coverage probability p and effective degrees of freedom ν_eff stated beside each (k = t_p(ν_eff), JCGM 100:2008 G.6.4), unless a figure is marked as a standard uncertainty.',
];

/** "k = 2.13, p = 95.45 %, ν_eff = 17" beside an expanded uncertainty; older snapshots state only k. */
/** The unit of u(xᵢ) in the budget table: a dash for a dimensionless input (stored as "1"), otherwise the unit. */
export function unitCell(unit: string | undefined): string {
  return !unit || /^1\b/.test(unit.trim()) ? '—' : unit;
}

export function coverageNote(q: { coverageFactor: number; coverageProbability?: number; effectiveDegreesOfFreedom?: number | null }): string {
  if (q.coverageProbability === undefined) return `k = ${q.coverageFactor}`;
  return coverageText({ coverageFactor: q.coverageFactor, coverageProbability: q.coverageProbability, effectiveDegreesOfFreedom: q.effectiveDegreesOfFreedom ?? null });
}

/** y as recorded with enough digits (rounding below u/10), or five significant digits in older snapshots. */
function yText(s: CertificateSnapshot): string {
  return s.fractionalOffset.yText ?? formatScientific(s.fractionalOffset.y, 5);
}

export class Flow {
  y = MARGIN.top;

  constructor(readonly doc: Doc) {}

  get bottom(): number {
    return PAGE.height - MARGIN.bottom;
  }

  get remaining(): number {
    return this.bottom - this.y;
  }

  newPage(): void {
    this.doc.addPage();
    this.y = MARGIN.top;
  }

  /** Starts a new page unless `height` points still fit on this one. */
  ensure(height: number): void {
    if (this.y + height > this.bottom) this.newPage();
  }
}

export interface TextStyle {
  font?: string;
  size?: number;
  colour?: string;
  align?: 'left' | 'right' | 'center';
  lineGap?: number;
}

function applyStyle(doc: Doc, style: TextStyle): void {
  doc.font(style.font ?? FONT.regular).fontSize(style.size ?? 9).fillColor(style.colour ?? COLOUR.ink);
}

export function measure(doc: Doc, text: string, width: number, style: TextStyle): number {
  applyStyle(doc, style);
  return doc.heightOfString(text, { width, lineGap: style.lineGap ?? 1.5 });
}

export function put(doc: Doc, text: string, x: number, y: number, width: number, style: TextStyle): number {
  applyStyle(doc, style);
  const height = doc.heightOfString(text, { width, lineGap: style.lineGap ?? 1.5 });
  doc.text(text, x, y, { width, align: style.align ?? 'left', lineGap: style.lineGap ?? 1.5 });
  return height;
}

// ---------------------------------------------------------------------------------------------
// Blocks

export function sectionHeading(flow: Flow, number: number, title: string, minFollowing = 40): void {
  const { doc } = flow;
  const text = `${number}   ${title}`;
  const h = measure(doc, text, CONTENT_WIDTH, { font: FONT.semi, size: 11.5 });
  // Keep a heading with the first lines of its section.
  flow.ensure(14 + h + 6 + minFollowing);
  flow.y += 14;
  put(doc, text, MARGIN.left, flow.y, CONTENT_WIDTH, { font: FONT.semi, size: 11.5, colour: COLOUR.teal });
  flow.y += h + 3;
  doc.moveTo(MARGIN.left, flow.y).lineTo(MARGIN.left + CONTENT_WIDTH, flow.y).lineWidth(0.6).strokeColor(COLOUR.rule).stroke();
  flow.y += 7;
}

export function paragraph(flow: Flow, text: string, style: TextStyle = {}, width = CONTENT_WIDTH, x = MARGIN.left): void {
  const { doc } = flow;
  const full = { size: 9, lineGap: 2, ...style };
  const h = measure(doc, text, width, full);
  if (h > flow.bottom - MARGIN.top) {
    // Longer than a page: let pdfkit flow it across pages within the same margins.
    flow.ensure(40);
    applyStyle(doc, full);
    doc.text(text, x, flow.y, { width, lineGap: full.lineGap });
    flow.y = doc.y + 4;
    return;
  }
  flow.ensure(h);
  put(doc, text, x, flow.y, width, full);
  flow.y += h + 4;
}

/** Label–value rows; labels in slate on the left, values wrap in their own column. */
export function keyValues(flow: Flow, rows: [string, string][], labelWidth = 150, valueSize = 9): void {
  const { doc } = flow;
  const valueWidth = CONTENT_WIDTH - labelWidth - 10;
  for (const [label, value] of rows) {
    const hl = measure(doc, label, labelWidth, { size: 8.5 });
    const hv = measure(doc, value, valueWidth, { size: valueSize });
    const h = Math.max(hl, hv);
    flow.ensure(h + 4);
    put(doc, label, MARGIN.left, flow.y + 0.5, labelWidth, { size: 8.5, colour: COLOUR.slate });
    put(doc, value, MARGIN.left + labelWidth + 10, flow.y + (9 - valueSize) / 2, valueWidth, { size: valueSize });
    flow.y += h + 4;
  }
}

export interface Column {
  header: string;
  width: number;
  align?: 'left' | 'right';
}

/** A table whose rows are measured cell by cell; the header repeats after a page break. */
export function table(flow: Flow, columns: Column[], rows: string[][], options: { boldLastRows?: number; size?: number } = {}): void {
  const { doc } = flow;
  const size = options.size ?? 8.5;
  const pad = 4;
  const fixed = columns.reduce((sum, c) => sum + c.width, 0);
  if (fixed > CONTENT_WIDTH + 0.01) throw new Error(`table columns ${fixed} pt wider than the page`);

  const rowHeight = (cells: string[], font: string) =>
    Math.max(...cells.map((cell, i) => measure(doc, cell, columns[i].width - 2 * pad, { font, size }))) + 2 * pad;

  const drawHeader = () => {
    const h = rowHeight(columns.map((c) => c.header), FONT.semi);
    doc.rect(MARGIN.left, flow.y, CONTENT_WIDTH, h).fill(COLOUR.pale);
    let x = MARGIN.left;
    for (const c of columns) {
      put(doc, c.header, x + pad, flow.y + pad, c.width - 2 * pad, { font: FONT.semi, size, colour: COLOUR.teal, align: c.align });
      x += c.width;
    }
    flow.y += h;
  };

  const headerHeight = rowHeight(columns.map((c) => c.header), FONT.semi);
  const firstRowHeight = rows.length ? rowHeight(rows[0], FONT.regular) : 0;
  flow.ensure(headerHeight + firstRowHeight);
  drawHeader();

  rows.forEach((cells, r) => {
    const bold = options.boldLastRows !== undefined && r >= rows.length - options.boldLastRows;
    const font = bold ? FONT.semi : FONT.regular;
    const h = rowHeight(cells, font);
    // Summary rows stay together, so a total never sits alone under a repeated header.
    const firstSummary = options.boldLastRows !== undefined && r === rows.length - options.boldLastRows;
    const needed = firstSummary ? rows.slice(r).reduce((sum, row) => sum + rowHeight(row, FONT.semi), 0) : h;
    if (flow.y + needed > flow.bottom) {
      flow.newPage();
      drawHeader();
    }
    if (r % 2 === 1 && !bold) doc.rect(MARGIN.left, flow.y, CONTENT_WIDTH, h).fill(COLOUR.zebra);
    if (bold) {
      doc.moveTo(MARGIN.left, flow.y).lineTo(MARGIN.left + CONTENT_WIDTH, flow.y).lineWidth(0.6).strokeColor(COLOUR.rule).stroke();
    }
    let x = MARGIN.left;
    cells.forEach((cell, i) => {
      put(doc, cell, x + pad, flow.y + pad, columns[i].width - 2 * pad, { font, size, align: columns[i].align });
      x += columns[i].width;
    });
    flow.y += h;
  });
  doc.moveTo(MARGIN.left, flow.y).lineTo(MARGIN.left + CONTENT_WIDTH, flow.y).lineWidth(0.6).strokeColor(COLOUR.rule).stroke();
  flow.y += 6;
}

// ---------------------------------------------------------------------------------------------
// Vector graphics

export function drawQrCode(doc: Doc, url: string, x: number, y: number, size: number): void {
  const qr = QRCode.create(url, { errorCorrectionLevel: 'M' });
  const n = qr.modules.size;
  const quiet = 2;
  const cell = size / (n + 2 * quiet);
  doc.rect(x, y, size, size).fill('#ffffff');
  for (let row = 0; row < n; row++) {
    let col = 0;
    while (col < n) {
      if (!qr.modules.get(row, col)) {
        col++;
        continue;
      }
      const start = col;
      while (col < n && qr.modules.get(row, col)) col++;
      // A hair of overlap hides the seams some viewers draw between adjacent cells.
      doc.rect(x + (quiet + start) * cell, y + (quiet + row) * cell, (col - start) * cell + 0.05, cell + 0.05);
    }
  }
  doc.fill(COLOUR.ink);
}

interface PlotBox {
  x: number;
  y: number;
  width: number;
  height: number;
}

function plotFrame(doc: Doc, box: PlotBox): void {
  doc.rect(box.x, box.y, box.width, box.height).lineWidth(0.6).strokeColor(COLOUR.slate).stroke();
}

function tickLabel(doc: Doc, text: string, x: number, y: number, width: number, align: 'left' | 'right' | 'center'): void {
  put(doc, text, x, y, width, { size: 6.5, colour: COLOUR.slate, align, lineGap: 0 });
}

/** Allan deviation on log–log axes with the confidence interval as error bars (IEEE Std 1139-2008 plot convention). */
function drawAllanPlot(doc: Doc, snapshot: CertificateSnapshot, outer: PlotBox): void {
  const points = snapshot.allanDeviation;
  const box: PlotBox = { x: outer.x + 34, y: outer.y + 4, width: outer.width - 42, height: outer.height - 30 };
  const tauExp = { min: Math.floor(Math.log10(Math.min(...points.map((p) => p.tauSeconds)))), max: Math.ceil(Math.log10(Math.max(...points.map((p) => p.tauSeconds)))) };
  const adevExp = { min: Math.floor(Math.log10(Math.min(...points.map((p) => p.low)))), max: Math.ceil(Math.log10(Math.max(...points.map((p) => p.high)))) };
  if (tauExp.max === tauExp.min) tauExp.max++;
  if (adevExp.max === adevExp.min) adevExp.max++;
  const sx = (tau: number) => box.x + ((Math.log10(tau) - tauExp.min) / (tauExp.max - tauExp.min)) * box.width;
  const sy = (v: number) => box.y + box.height - ((Math.log10(v) - adevExp.min) / (adevExp.max - adevExp.min)) * box.height;

  doc.save();
  // Decade grid with minor ticks at 2..9 so the log scale reads at a glance.
  for (let e = tauExp.min; e <= tauExp.max; e++) {
    const x = sx(10 ** e);
    if (e > tauExp.min && e < tauExp.max) doc.moveTo(x, box.y).lineTo(x, box.y + box.height).lineWidth(0.3).strokeColor(COLOUR.rule).stroke();
    tickLabel(doc, `10${superscriptInteger(e)}`, x - 15, box.y + box.height + 3, 30, 'center');
    for (let m = 2; m < 10 && e < tauExp.max; m++) {
      const xm = sx(m * 10 ** e);
      doc.moveTo(xm, box.y + box.height).lineTo(xm, box.y + box.height - 2.5).lineWidth(0.4).strokeColor(COLOUR.slate).stroke();
    }
  }
  for (let e = adevExp.min; e <= adevExp.max; e++) {
    const y = sy(10 ** e);
    if (e > adevExp.min && e < adevExp.max) doc.moveTo(box.x, y).lineTo(box.x + box.width, y).lineWidth(0.3).strokeColor(COLOUR.rule).stroke();
    tickLabel(doc, `10${superscriptInteger(e)}`, box.x - 33, y - 4, 30, 'right');
    for (let m = 2; m < 10 && e < adevExp.max; m++) {
      const ym = sy(m * 10 ** e);
      doc.moveTo(box.x, ym).lineTo(box.x + 2.5, ym).lineWidth(0.4).strokeColor(COLOUR.slate).stroke();
    }
  }
  plotFrame(doc, box);

  for (const p of points) {
    const x = sx(p.tauSeconds);
    doc.moveTo(x, sy(p.low)).lineTo(x, sy(p.high)).lineWidth(0.7).strokeColor(COLOUR.slate).stroke();
    doc.moveTo(x - 2, sy(p.low)).lineTo(x + 2, sy(p.low)).moveTo(x - 2, sy(p.high)).lineTo(x + 2, sy(p.high)).stroke();
  }
  points.forEach((p, i) => {
    if (i === 0) doc.moveTo(sx(p.tauSeconds), sy(p.adev));
    else doc.lineTo(sx(p.tauSeconds), sy(p.adev));
  });
  doc.lineWidth(0.9).strokeColor(COLOUR.teal).stroke();
  for (const p of points) doc.circle(sx(p.tauSeconds), sy(p.adev), 1.8).fill(COLOUR.teal);
  doc.restore();

  put(doc, 'averaging time τ (s)', box.x, box.y + box.height + 13, box.width, { size: 7, colour: COLOUR.slate, align: 'center', lineGap: 0 });
}

/** Decimated series as offsets from the certified y, so the scatter is visible whatever the mean. */
function drawTimeSeries(doc: Doc, snapshot: CertificateSnapshot, outer: PlotBox): string {
  const series = snapshot.timeSeries;
  const box: PlotBox = { x: outer.x + 34, y: outer.y + 4, width: outer.width - 42, height: outer.height - 30 };
  const reference = snapshot.fractionalOffset.y;
  const spanSeconds = Math.max(...series.map((p) => p.tSeconds));
  const timeUnit = spanSeconds > 3 * 86_400 ? { seconds: 86_400, label: 'days' } : { seconds: 3_600, label: 'hours' };
  const deviations = series.map((p) => p.y - reference);
  const maxAbs = Math.max(...deviations.map(Math.abs)) || Math.abs(reference) || 1e-18;
  const exponent = Math.floor(Math.log10(maxAbs));
  const scale = 10 ** exponent;
  const scaled = deviations.map((d) => d / scale);
  let yMin = Math.min(...scaled, 0);
  let yMax = Math.max(...scaled, 0);
  const padY = (yMax - yMin) * 0.08 || 1;
  yMin -= padY;
  yMax += padY;
  const tMax = spanSeconds / timeUnit.seconds || 1;
  const sx = (t: number) => box.x + (t / tMax) * box.width;
  const sy = (v: number) => box.y + box.height - ((v - yMin) / (yMax - yMin)) * box.height;

  doc.save();
  for (const t of niceLinearTicks(0, tMax, 5)) {
    const x = sx(t);
    doc.moveTo(x, box.y + box.height).lineTo(x, box.y + box.height - 3).lineWidth(0.4).strokeColor(COLOUR.slate).stroke();
    tickLabel(doc, formatTick(t), x - 15, box.y + box.height + 3, 30, 'center');
  }
  for (const v of niceLinearTicks(yMin, yMax, 5)) {
    const y = sy(v);
    doc.moveTo(box.x, y).lineTo(box.x + box.width, y).lineWidth(0.3).strokeColor(COLOUR.rule).stroke();
    tickLabel(doc, formatTick(v), box.x - 33, y - 4, 30, 'right');
  }
  doc.moveTo(box.x, sy(0)).lineTo(box.x + box.width, sy(0)).lineWidth(0.5).dash(2, { space: 2 }).strokeColor(COLOUR.slate).stroke();
  doc.undash();
  plotFrame(doc, box);
  // The snapshot holds only buckets with data; a step well above the usual one is a gap, and the line breaks there.
  const steps = series.slice(1).map((p, i) => p.tSeconds - series[i].tSeconds).sort((u, v) => u - v);
  const gapSeconds = 2 * (steps[Math.floor(steps.length / 2)] ?? Infinity);
  series.forEach((p, i) => {
    const x = sx(p.tSeconds / timeUnit.seconds);
    const y = sy(scaled[i]);
    if (i === 0 || p.tSeconds - series[i - 1].tSeconds > gapSeconds) doc.moveTo(x, y);
    else doc.lineTo(x, y);
  });
  doc.lineWidth(0.5).strokeColor(COLOUR.teal).stroke();
  doc.restore();

  put(doc, `time since start (${timeUnit.label})`, box.x, box.y + box.height + 13, box.width, { size: 7, colour: COLOUR.slate, align: 'center', lineGap: 0 });
  return `(y − ŷ) in units of 10${superscriptInteger(exponent)}; ŷ = certified offset`;
}

function formatTick(v: number): string {
  const rounded = Number(v.toPrecision(6));
  return rounded === 0 ? '0' : String(rounded).replace('-', '−');
}

function plots(flow: Flow, snapshot: CertificateSnapshot): void {
  const { doc } = flow;
  const gap = 18;
  const width = (CONTENT_WIDTH - gap) / 2;
  const height = 170;
  const captionStyle: TextStyle = { size: 7.5, colour: COLOUR.slate };
  const titleStyle: TextStyle = { font: FONT.semi, size: 8.5 };
  const captionA = 'Overlapping Allan deviation σᵧ(τ) of y, bars: confidence interval';
  const titleH = Math.max(measure(doc, 'Stability', width, titleStyle), measure(doc, 'Time series', width, titleStyle));
  const captionH = Math.max(measure(doc, captionA, width, captionStyle), measure(doc, 'x'.repeat(60), width, captionStyle));
  flow.ensure(titleH + 2 + height + 4 + captionH);
  const top = flow.y;
  put(doc, 'Stability', MARGIN.left, top, width, titleStyle);
  put(doc, 'Time series (decimated)', MARGIN.left + width + gap, top, width, titleStyle);
  const plotTop = top + titleH + 2;
  drawAllanPlot(doc, snapshot, { x: MARGIN.left, y: plotTop, width, height });
  const captionB = drawTimeSeries(doc, snapshot, { x: MARGIN.left + width + gap, y: plotTop, width, height });
  const capTop = plotTop + height + 4;
  const hA = put(doc, captionA, MARGIN.left, capTop, width, captionStyle);
  const hB = put(doc, captionB, MARGIN.left + width + gap, capTop, width, captionStyle);
  flow.y = capTop + Math.max(hA, hB) + 6;
}

// ---------------------------------------------------------------------------------------------
// Page furniture

function titleBlock(flow: Flow, s: CertificateSnapshot): void {
  const { doc } = flow;
  const qrSize = 92;
  const textWidth = CONTENT_WIDTH - qrSize - 18;
  const top = flow.y;

  let y = top;
  y += put(doc, 'CHRONOLEVEL  ·  CERTIFICATE OF A CLOCK-BASED GEOPOTENTIAL DIFFERENCE', MARGIN.left, y, textWidth, { size: 7.5, colour: COLOUR.slate, lineGap: 0 }) + 6;
  y += put(doc, 'Geopotential difference from an optical clock comparison', MARGIN.left, y, textWidth, { font: FONT.semi, size: 18, lineGap: 0 }) + 8;
  y += put(doc, s.certificateNumber, MARGIN.left, y, textWidth, { font: FONT.semi, size: 13, colour: COLOUR.teal, lineGap: 0 }) + 3;
  const issued = `Revision ${s.revision}  ·  issued ${s.issueDate.slice(0, 10)}  ·  by ${s.issuingInstitute}`;
  y += put(doc, issued, MARGIN.left, y, textWidth, { size: 9, colour: COLOUR.slate }) + 2;
  y += put(doc, `Participants: ${s.participants.join('; ')}`, MARGIN.left, y, textWidth, { size: 9, colour: COLOUR.slate });

  drawQrCode(doc, s.verificationUrl, MARGIN.left + CONTENT_WIDTH - qrSize, top, qrSize);
  const qrCaptionH = put(doc, 'Scan to verify this file', MARGIN.left + CONTENT_WIDTH - qrSize, top + qrSize + 2, qrSize, {
    size: 6.5,
    colour: COLOUR.slate,
    align: 'center',
    lineGap: 0,
  });
  flow.y = Math.max(y, top + qrSize + 2 + qrCaptionH) + 14;
}

export type PanelCell = { label: string; value: string; note: string; alert?: boolean };

/** The result panel at the top of a certificate: four cells in two rows (label, value, note), an alert in red. */
export function drawResultPanel(flow: Flow, cells: PanelCell[]): void {
  const { doc } = flow;
  const pad = 10;
  const gap = 14;
  const cellWidth = (CONTENT_WIDTH - 2 * pad - gap) / 2;
  const styles = {
    label: { size: 7.5, colour: COLOUR.slate } as TextStyle,
    value: { font: FONT.semi, size: 12.5, lineGap: 0 } as TextStyle,
    note: { size: 7.5, colour: COLOUR.slate } as TextStyle,
  };
  const heights = cells.map(
    (c) => measure(doc, c.label, cellWidth, styles.label) + 2 + measure(doc, c.value, cellWidth, styles.value) + 2 + measure(doc, c.note, cellWidth, styles.note),
  );
  const rowHeights = [Math.max(heights[0], heights[1]), Math.max(heights[2], heights[3])];
  const panelHeight = 2 * pad + rowHeights[0] + 10 + rowHeights[1];
  flow.ensure(panelHeight);
  const top = flow.y;
  doc.rect(MARGIN.left, top, CONTENT_WIDTH, panelHeight).fill(COLOUR.pale);
  doc.rect(MARGIN.left, top, 3, panelHeight).fill(COLOUR.teal);
  cells.forEach((c, i) => {
    const x = MARGIN.left + pad + (i % 2) * (cellWidth + gap);
    let y = top + pad + (i >= 2 ? rowHeights[0] + 10 : 0);
    y += put(doc, c.label, x, y, cellWidth, styles.label) + 2;
    y += put(doc, c.value, x, y, cellWidth, { ...styles.value, colour: c.alert ? COLOUR.alert : COLOUR.ink }) + 2;
    put(doc, c.note, x, y, cellWidth, styles.note);
  });
  flow.y = top + panelHeight + 4;
}

function resultPanel(flow: Flow, s: CertificateSnapshot): void {
  const g = s.geodeticComparison;
  const cells: { label: string; value: string; note: string; alert?: boolean }[] = [
    {
      label: 'Geopotential difference ΔC = C(B) − C(A)',
      value: `${formatValueWithUncertainty(s.deltaC_m2s2.value, s.deltaC_m2s2.expandedUncertainty)} m²/s²`,
      note: `expanded uncertainty U, ${coverageNote(s.deltaC_m2s2)}`,
    },
    {
      label: 'Normal-height difference ΔH = H(B) − H(A)',
      value: `${formatValueWithUncertainty(s.deltaH_m.value, s.deltaH_m.expandedUncertainty)} m`,
      note: `expanded uncertainty U, ${coverageNote(s.deltaH_m)}`,
    },
    {
      label: 'Fractional frequency offset y',
      value: yText(s),
      note: `standard uncertainty u(y) = ${formatScientific(s.fractionalOffset.standardUncertainty, 2)}`,
    },
    {
      label: 'Eₙ against the sites’ registered normal heights (geodesy)',
      value: `Eₙ = ${formatFixed(g.En, 2)}  ·  ${g.agreed ? 'agreed' : 'NOT agreed'}`,
      note: `ΔH from the registered normal heights = ${formatValueWithUncertainty(g.deltaHGeodesy_m.value, g.deltaHGeodesy_m.expandedUncertainty)} m (${coverageNote(g.deltaHGeodesy_m)}); criterion |Eₙ| not above 1`,
      alert: !g.agreed,
    },
  ];
  drawResultPanel(flow, cells);
}

export function drawFurniture(doc: Doc, s: Pick<CertificateSnapshot, 'certificateNumber'>): void {
  const range = doc.bufferedPageRange();
  for (let i = range.start; i < range.start + range.count; i++) {
    doc.switchToPage(i);
    // Text below the bottom margin would make pdfkit start a new page; lift the margin while drawing.
    const savedBottom = doc.page.margins.bottom;
    doc.page.margins.bottom = 0;
    doc.rect(0, 0, PAGE.width, 5).fill(COLOUR.teal);
    const footerY = PAGE.height - 44;
    doc.moveTo(MARGIN.left, footerY).lineTo(MARGIN.left + CONTENT_WIDTH, footerY).lineWidth(0.5).strokeColor(COLOUR.rule).stroke();
    const half = CONTENT_WIDTH / 2;
    put(doc, `Certificate ${s.certificateNumber}`, MARGIN.left, footerY + 6, half, { size: 7.5, colour: COLOUR.slate, lineGap: 0 });
    put(doc, `page ${i - range.start + 1} of ${range.count}`, MARGIN.left + half, footerY + 6, half, {
      size: 7.5,
      colour: COLOUR.slate,
      align: 'right',
      lineGap: 0,
    });
    doc.page.margins.bottom = savedBottom;
  }
}

// ---------------------------------------------------------------------------------------------

function formatPeriod(s: CertificateSnapshot): string {
  const start = s.measurementPeriod.start.replace('T', ' ').replace(/:\d{2}(\.\d+)?Z$/, ' UTC');
  const end = s.measurementPeriod.end.replace('T', ' ').replace(/:\d{2}(\.\d+)?Z$/, ' UTC');
  const days = (Date.parse(s.measurementPeriod.end) - Date.parse(s.measurementPeriod.start)) / 86_400_000;
  return `${start} to ${end} (${days.toFixed(2)} days)`;
}

function renderBody(doc: Doc, s: CertificateSnapshot): void {
  const flow = new Flow(doc);
  titleBlock(flow, s);
  resultPanel(flow, s);

  let n = 0;
  sectionHeading(flow, ++n, 'Clocks and link');
  table(
    flow,
    [
      { header: '', width: 120 },
      { header: 'Clock A', width: (CONTENT_WIDTH - 120) / 2 },
      { header: 'Clock B', width: (CONTENT_WIDTH - 120) / 2 },
    ],
    [
      ['Name', s.clockA.name, s.clockB.name],
      ['Institute', s.clockA.institute, s.clockB.institute],
      ['Species', s.clockA.species, s.clockB.species],
      ['Transition', s.clockA.transition, s.clockB.transition],
      ['Nominal frequency (Hz)', s.clockA.nominalFrequencyHz, s.clockB.nominalFrequencyHz],
    ],
  );
  keyValues(flow, [
    ['Fibre link', s.fibreLink.name],
    ['Fibre length', `${formatFixed(s.fibreLink.fibreLengthKm, 1)} km`],
    ['Geodesic distance (GRS80)', `${formatFixed(s.fibreLink.geodesicDistanceKm, 1)} km`],
    ['Measurement period', formatPeriod(s)],
    ['Uptime', `${formatFixed(s.uptimeFraction * 100, 1)} %`],
  ]);

  sectionHeading(flow, ++n, 'Frequency ratio');
  keyValues(flow, [
    ['Measured ratio νB/νA', s.measuredRatio],
    ['Reference ratio', s.referenceRatio.value],
    ['Source of the reference ratio', s.referenceRatio.source],
    ['Fractional offset y = R/R₀ − 1', `${yText(s)}, standard uncertainty ${formatScientific(s.fractionalOffset.standardUncertainty, 2)}`],
  ]);

  sectionHeading(flow, ++n, 'Uncertainty budget (GUM)', 80);
  paragraph(
    flow,
    `Contributions |cᵢ|·u(xᵢ) are in ${s.budget.outputUnit}, combined in quadrature as in JCGM 100:2008 (GUM) 5.1.2 for uncorrelated inputs; type A from statistics of the series, type B from other information.`,
    { size: 8, colour: COLOUR.slate },
  );
  const u = s.budget.combinedStandardUncertainty;
  table(
    flow,
    [
      { header: 'Component', width: 203 },
      { header: 'Type', width: 30 },
      { header: 'u(xᵢ)', width: 62, align: 'right' },
      { header: 'Unit', width: 40 },
      { header: 'cᵢ', width: 68, align: 'right' },
      { header: `|cᵢ|·u(xᵢ) (${s.budget.outputUnit})`, width: CONTENT_WIDTH - 203 - 30 - 62 - 40 - 68, align: 'right' },
    ],
    [
      ...s.budget.rows.map((r) => [
        r.component,
        r.type,
        formatScientific(r.standardUncertainty, 2),
        unitCell(r.unit),
        formatScientific(r.sensitivity, 4),
        formatScientific(r.contribution, 2),
      ]),
      ['Combined standard uncertainty', '', '', '', '', formatScientific(u, 2)],
      [`Expanded uncertainty U, ${coverageNote({ coverageFactor: s.budget.coverageFactor ?? 2, coverageProbability: s.budget.coverageProbability, effectiveDegreesOfFreedom: s.budget.effectiveDegreesOfFreedom })}`, '', '', '', '', formatScientific((s.budget.coverageFactor ?? 2) * u, 2)],
    ],
    { boldLastRows: 2 },
  );

  sectionHeading(flow, ++n, 'Stability and data', 200);
  plots(flow, s);

  sectionHeading(flow, ++n, 'Conventions and constants');
  keyValues(flow, [
    ['Tide system', s.tideSystem],
    ['W₀ convention', `${s.w0Convention.name}: W₀ = ${s.w0Convention.value_m2s2} m²/s² (${s.w0Convention.source})`],
  ]);
  table(
    flow,
    [
      { header: 'Constant', width: 140 },
      { header: 'Value', width: 140 },
      { header: 'Unit', width: 50 },
      { header: 'Source', width: CONTENT_WIDTH - 330 },
    ],
    s.constants.map((c) => [c.name, c.value, c.unit, c.source]),
  );

  sectionHeading(flow, ++n, 'Method');
  for (const para of s.method.statement.split(/\n\s*\n/)) paragraph(flow, para.trim());
  flow.y += 2;
  paragraph(flow, 'Published sources', { font: FONT.semi, size: 8.5 });
  s.method.sources.forEach((src, i) => {
    const label = `[${i + 1}]`;
    const h = measure(doc, src, CONTENT_WIDTH - 24, { size: 8.5 });
    flow.ensure(h);
    put(doc, label, MARGIN.left, flow.y, 22, { size: 8.5, colour: COLOUR.slate });
    put(doc, src, MARGIN.left + 24, flow.y, CONTENT_WIDTH - 24, { size: 8.5 });
    flow.y += h + 3;
  });

  if (s.review) reviewSection(flow, ++n, s.review);

  sectionHeading(flow, ++n, 'Traceability');
  keyValues(flow, [
    ['Software version', s.softwareVersion],
    ['Audit-chain head at issue', groupHex(s.auditChainHead)],
  ], 164, 8);
  table(
    flow,
    [
      { header: 'Input file', width: 170 },
      { header: 'SHA-256', width: CONTENT_WIDTH - 170 },
    ],
    s.inputFiles.map((f) => [f.name, groupHex(f.sha256)]),
    { size: 8 },
  );

  if (s.assumptions?.length) {
    sectionHeading(flow, ++n, 'Assumptions');
    for (const assumption of s.assumptions) paragraph(flow, `• ${assumption}`, { size: 8.5 });
  }

  sectionHeading(flow, n + 1, 'Cautions');
  for (const caution of [...STANDING_CAUTIONS, ...s.cautions]) {
    const h = measure(doc, caution, CONTENT_WIDTH - 14, { size: 9 });
    flow.ensure(h);
    doc.rect(MARGIN.left + 2, flow.y + 4, 3.5, 3.5).fill(COLOUR.teal);
    put(doc, caution, MARGIN.left + 14, flow.y, CONTENT_WIDTH - 14, { size: 9 });
    flow.y += h + 4;
  }

  signatureBlock(flow, s);
}

/** Who accepted and certified, and — when the campaign had review exceptions — why it was certified anyway. */
export function reviewSection(flow: Flow, number: number, r: NonNullable<CertificateSnapshot['review']>): void {
  sectionHeading(flow, number, 'Review decision');
  keyValues(flow, [
    ['Accepted by', r.acceptedBy ? `${r.acceptedBy}${r.acceptanceComment ? `: ${r.acceptanceComment}` : ''}` : '—'],
    ['Certified by', `${r.certifiedBy}: ${r.certificationComment}`],
    ...r.exceptions.map((text, i): [string, string] => [i === 0 ? 'Accepted despite' : '', text]),
    ...r.justifications.map((j): [string, string] => [`Justification (${j.stage})`, `${j.text} (${j.by})`]),
  ]);
}

export function signatureBlock(flow: Flow, s: Pick<CertificateSnapshot, 'issuingInstitute' | 'signer' | 'verificationUrl'>): void {
  const { doc } = flow;
  const lines: [string, TextStyle][] = [
    [`Signed for ${s.issuingInstitute}`, { size: 8, colour: COLOUR.slate }],
    [s.signer.name, { font: FONT.semi, size: 11 }],
    [s.signer.role, { size: 9 }],
    [
      `This file carries a digital signature (PAdES, ETSI.CAdES.detached) made under the institute's root certificate, with a trusted time-stamp and the validation data to check it offline; the data behind it are attached as JSON and CSV. Any change to the file breaks the signature. Verify the file at ${s.verificationUrl}`,
      { size: 8, colour: COLOUR.slate },
    ],
  ];
  const pad = 10;
  const width = CONTENT_WIDTH - 2 * pad;
  const total = lines.reduce((sum, [text, style]) => sum + measure(doc, text, width, style) + 3, 0) + 2 * pad;
  flow.ensure(total + 14);
  flow.y += 14;
  const top = flow.y;
  doc.rect(MARGIN.left, top, CONTENT_WIDTH, total).lineWidth(0.8).strokeColor(COLOUR.teal).stroke();
  let y = top + pad;
  for (const [text, style] of lines) y += put(doc, text, MARGIN.left + pad, y, width, style) + 3;
  flow.y = top + total;
}

/**
 * Renders the certificate as an unsigned PDF. The certificate number is also stored in the
 * document information dictionary (custom key /CertificateNumber and in /Keywords) so a verifier
 * can look the record up without parsing page content.
 */
export async function renderCertificatePdf(input: CertificateSnapshot): Promise<Buffer> {
  const snapshot = parseCertificateSnapshot(input);
  return buildCertificatePdf({
    number: snapshot.certificateNumber, issueDate: snapshot.issueDate, issuingInstitute: snapshot.issuingInstitute, softwareVersion: snapshot.softwareVersion,
    title: `Certificate ${snapshot.certificateNumber}: geopotential difference from an optical clock comparison`,
    subject: `Chronometric levelling certificate ${snapshot.certificateNumber}`,
    keywords: `${snapshot.certificateNumber}; chronometric levelling; geopotential difference`,
    snapshotJson: snapshot, csv: resultCsv(snapshot),
    body: (doc) => renderBody(doc, snapshot),
  });
}

/**
 * The PDF shell every certificate kind shares: fonts, document information (with /CertificateNumber for the
 * verifier), the body drawn by `body`, the page furniture, and the PDF/A-3 parts with the snapshot and CSV attached.
 */
export async function buildCertificatePdf(o: {
  number: string; issueDate: string; issuingInstitute: string; softwareVersion: string; title: string; subject: string; keywords: string;
  snapshotJson: unknown; csv: string; body: (doc: Doc) => void;
}): Promise<Buffer> {
  const snapshot = { certificateNumber: o.number };
  const fonts = loadCertificateFonts();
  const issued = new Date(o.issueDate);
  const info = {
    Title: o.title,
    Author: o.issuingInstitute,
    Subject: o.subject,
    Keywords: o.keywords,
    Creator: `Chronolevel ${o.softwareVersion}`,
    Producer: `Chronolevel ${o.softwareVersion} (pdfkit)`,
  };
  const doc = new PDFDocument({
    // PDF/A-3 (ISO 19005-3) builds on PDF 1.7.
    pdfVersion: '1.7',
    size: 'A4',
    margins: MARGIN,
    bufferPages: true,
    // Content streams may be deflated: the signing placeholder only parses the classic xref
    // table, trailer, catalogue and page objects, which pdfkit always writes uncompressed.
    compress: true,
    info: { ...info, CreationDate: issued, ModDate: issued },
  });
  (doc.info as unknown as Record<string, string>).CertificateNumber = snapshot.certificateNumber;

  const chunks: Buffer[] = [];
  const done = new Promise<Buffer>((resolve, reject) => {
    doc.on('data', (chunk: Buffer) => chunks.push(chunk));
    doc.on('end', () => resolve(Buffer.concat(chunks)));
    doc.on('error', reject);
  });

  doc.registerFont(FONT.regular, fonts.regular);
  doc.registerFont(FONT.semi, fonts.semiBold);
  o.body(doc);
  drawFurniture(doc, snapshot);
  addArchivalParts(doc, {
    title: info.Title, author: info.Author, subject: info.Subject, keywords: info.Keywords, creator: info.Creator, producer: info.Producer,
    created: issued,
    attachments: [
      {
        name: `${snapshot.certificateNumber}.snapshot.json`, mime: 'application/json', relationship: 'Source',
        description: 'Machine-readable snapshot the certificate was rendered from (schema: certificate-snapshot)',
        data: Buffer.from(`${JSON.stringify(o.snapshotJson, null, 2)}\n`, 'utf8'),
      },
      {
        name: `${snapshot.certificateNumber}.result.csv`, mime: 'text/csv', relationship: 'Data',
        description: 'Result quantities with units and uncertainties (CSV, RFC 4180)',
        data: Buffer.from(o.csv, 'utf8'),
      },
    ],
  });
  doc.end();
  return done;
}
