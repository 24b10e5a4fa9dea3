import { Fragment, type ReactNode } from 'react';

// Symbols written with an underscore in plain text (C_B, ν_A, U_clock) are shown with a real subscript.
// Only short symbols qualify, so identifiers such as column names (mean_gravity_ms2) stay as they are.

const SYMBOL = /(?<![\p{L}\p{N}_])([A-Za-zΔνσγ]{1,2})_([\p{L}0-9]{1,12})(?![\p{L}0-9_])/gu;

export function typeset(text: string): ReactNode {
  if (!text.includes('_')) return text;
  const out: ReactNode[] = [];
  let last = 0;
  for (const m of text.matchAll(SYMBOL)) {
    out.push(text.slice(last, m.index), <Fragment key={m.index}>{m[1]}<sub>{m[2]}</sub></Fragment>);
    last = m.index + m[0].length;
  }
  out.push(text.slice(last));
  return out;
}

export function Typeset({ text }: { text: string }) {
  return <>{typeset(text)}</>;
}
