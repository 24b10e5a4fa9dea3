// A minimal ICC version 2 display profile for sRGB, built from the published colour space definition rather
// than copied from a file: primaries and D65 white point of IEC 61966-2-1:1999 (sRGB), chromatically adapted
// to the ICC profile connection space illuminant D50 (ICC.1:2001-04, 6.3.4.3: X 0.9642, Y 1.0, Z 0.8249)
// with the linear Bradford transform (ICC.1:2010 Annex E.3), and the sRGB transfer function sampled as a
// 1024-point curve. Tags (ICC.1:2001-04 6.4): desc, cprt, wtpt, rXYZ/gXYZ/bXYZ, rTRC/gTRC/bTRC.

const PRIMARIES = { r: [0.64, 0.33], g: [0.3, 0.6], b: [0.15, 0.06] } as const;
const D65 = [0.3127, 0.329] as const;
export const PCS_D50 = [0.9642, 1.0, 0.8249] as const;
/** Bradford cone response matrix (ICC.1:2010 Annex E, equation E.5). */
const BRADFORD = [
  [0.8951, 0.2664, -0.1614],
  [-0.7502, 1.7135, 0.0367],
  [0.0389, -0.0685, 1.0296],
];

type M3 = number[][];
const mul = (a: M3, b: M3): M3 => a.map((row) => b[0].map((_, j) => row.reduce((s, v, k) => s + v * b[k][j], 0)));
const mulV = (a: M3, v: number[]) => a.map((row) => row.reduce((s, x, k) => s + x * v[k], 0));
function inv(m: M3): M3 {
  const [[a, b, c], [d, e, f], [g, h, i]] = m;
  const det = a * (e * i - f * h) - b * (d * i - f * g) + c * (d * h - e * g);
  return [
    [(e * i - f * h) / det, (c * h - b * i) / det, (b * f - c * e) / det],
    [(f * g - d * i) / det, (a * i - c * g) / det, (c * d - a * f) / det],
    [(d * h - e * g) / det, (b * g - a * h) / det, (a * e - b * d) / det],
  ];
}
const xyToXYZ = ([x, y]: readonly [number, number]) => [x / y, 1, (1 - x - y) / y];

/** RGB (linear) → XYZ relative to D50: columns are the adapted red, green and blue colorants. */
export function srgbToD50Matrix(): M3 {
  const cols = [PRIMARIES.r, PRIMARIES.g, PRIMARIES.b].map(xyToXYZ);
  const p: M3 = [0, 1, 2].map((row) => cols.map((c) => c[row]));
  const white = xyToXYZ(D65);
  const s = mulV(inv(p), white);
  const rgbToXyzD65 = p.map((row) => row.map((v, j) => v * s[j]));
  const src = mulV(BRADFORD, white);
  const dst = mulV(BRADFORD, [...PCS_D50]);
  const scale: M3 = [0, 1, 2].map((i) => [0, 1, 2].map((j) => (i === j ? dst[i] / src[i] : 0)));
  const adapt = mul(inv(BRADFORD), mul(scale, BRADFORD));
  return mul(adapt, rgbToXyzD65);
}

/** IEC 61966-2-1 transfer function, encoded value → linear. */
export function srgbToLinear(v: number): number {
  return v <= 0.04045 ? v / 12.92 : ((v + 0.055) / 1.055) ** 2.4;
}

function s15Fixed16(v: number): Buffer {
  const b = Buffer.alloc(4);
  b.writeInt32BE(Math.round(v * 65536));
  return b;
}

function xyzTag(xyz: number[]): Buffer {
  return Buffer.concat([Buffer.from('XYZ \0\0\0\0', 'latin1'), ...xyz.map(s15Fixed16)]);
}

function textTag(text: string): Buffer {
  return Buffer.concat([Buffer.from('text\0\0\0\0', 'latin1'), Buffer.from(`${text}\0`, 'latin1')]);
}

function descTag(text: string): Buffer {
  const ascii = Buffer.from(`${text}\0`, 'latin1');
  const count = Buffer.alloc(4);
  count.writeUInt32BE(ascii.length);
  // Unicode language code and count (0), ScriptCode code (0), count (0) and 67 filler bytes.
  return Buffer.concat([Buffer.from('desc\0\0\0\0', 'latin1'), count, ascii, Buffer.alloc(4 + 4 + 2 + 1 + 67)]);
}

function curveTag(points: number): Buffer {
  const b = Buffer.alloc(12 + points * 2);
  b.write('curv', 0, 'latin1');
  b.writeUInt32BE(points, 8);
  for (let i = 0; i < points; i++) b.writeUInt16BE(Math.round(srgbToLinear(i / (points - 1)) * 65535), 12 + i * 2);
  return b;
}

const pad4 = (b: Buffer) => (b.length % 4 ? Buffer.concat([b, Buffer.alloc(4 - (b.length % 4))]) : b);

let cached: Buffer | undefined;

export function srgbIccProfile(): Buffer {
  if (cached) return cached;
  const m = srgbToD50Matrix();
  const trc = pad4(curveTag(1024));
  const tags: [string, Buffer][] = [
    ['desc', pad4(descTag('sRGB IEC61966-2-1 (Chronolevel, computed)'))],
    ['cprt', pad4(textTag('No copyright; computed from IEC 61966-2-1 parameters'))],
    ['wtpt', xyzTag([...PCS_D50])],
    ['rXYZ', xyzTag([m[0][0], m[1][0], m[2][0]])],
    ['gXYZ', xyzTag([m[0][1], m[1][1], m[2][1]])],
    ['bXYZ', xyzTag([m[0][2], m[1][2], m[2][2]])],
    ['rTRC', trc],
    ['gTRC', trc],
    ['bTRC', trc],
  ];
  const tableSize = 4 + tags.length * 12;
  let offset = 128 + tableSize;
  const table = Buffer.alloc(tableSize);
  table.writeUInt32BE(tags.length, 0);
  const data: Buffer[] = [];
  const placed = new Map<Buffer, number>();
  tags.forEach(([sig, body], i) => {
    let at = placed.get(body);
    if (at === undefined) {
      at = offset;
      placed.set(body, at);
      data.push(body);
      offset += body.length;
    }
    table.write(sig, 4 + i * 12, 'latin1');
    table.writeUInt32BE(at, 8 + i * 12);
    table.writeUInt32BE(sig.endsWith('TRC') ? 12 + 1024 * 2 : body.length, 12 + i * 12);
  });
  const header = Buffer.alloc(128);
  header.writeUInt32BE(offset, 0);
  header.writeUInt32BE(0x02100000, 8); // version 2.1.0
  header.write('mntr', 12, 'latin1');
  header.write('RGB ', 16, 'latin1');
  header.write('XYZ ', 20, 'latin1');
  [2025, 1, 1, 0, 0, 0].forEach((v, i) => header.writeUInt16BE(v, 24 + i * 2));
  header.write('acsp', 36, 'latin1');
  header.writeUInt32BE(0, 64); // perceptual
  PCS_D50.forEach((v, i) => s15Fixed16(v).copy(header, 68 + i * 4));
  cached = Buffer.concat([header, table, ...data]);
  return cached;
}
