// Number presentation for the network pages: units always shown, fixed decimals per quantity.
export const fmt = (v: number | null | undefined, digits = 3) => (v === null || v === undefined || !Number.isFinite(v) ? '—' : v.toFixed(digits));
export const mm = (metres: number | null | undefined, digits = 1) => (metres == null ? '—' : `${(metres * 1000).toFixed(digits)} mm`);
export const when = (iso: string | null) => (iso ? `${iso.replace('T', ' ').slice(0, 16)} UTC` : '—');
