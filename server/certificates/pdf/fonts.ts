import { readFileSync } from 'node:fs';
import { createRequire } from 'node:module';

// Noto Sans as TrueType: @fontsource ships only WOFF/WOFF2 split into unicode-range subsets, so its
// Latin file has no Δ, σ or τ. The Google Fonts build packaged by @expo-google-fonts/noto-sans holds
// the full Latin/Greek/Cyrillic repertoire in one TTF per weight, which pdfkit (fontkit) subsets and embeds.

const require = createRequire(import.meta.url);

export interface CertificateFonts {
  regular: Buffer;
  semiBold: Buffer;
}

let cached: CertificateFonts | undefined;

export function loadCertificateFonts(): CertificateFonts {
  cached ??= {
    regular: readFileSync(require.resolve('@expo-google-fonts/noto-sans/400Regular/NotoSans_400Regular.ttf')),
    semiBold: readFileSync(require.resolve('@expo-google-fonts/noto-sans/600SemiBold/NotoSans_600SemiBold.ttf')),
  };
  return cached;
}
