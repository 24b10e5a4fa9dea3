import type { Config } from 'tailwindcss';

// Chronolevel's own palette: deep slate-teal ink, warm paper, a brass accent; signal colours are never the only cue.
export default {
  content: ['./index.html', './src/**/*.{ts,tsx}'],
  theme: {
    extend: {
      fontFamily: { sans: ['"Noto Sans"', 'system-ui', 'sans-serif'] },
      colors: {
        ink: { 50: '#eef3f4', 100: '#d5e2e5', 200: '#adc5cb', 300: '#7fa3ab', 400: '#55808a', 500: '#3a6570', 600: '#2b4f59', 700: '#1d3a44', 800: '#142b33', 900: '#0c1b20' },
        paper: { 50: '#fbf9f4', 100: '#f4efe4', 200: '#e8dfcc' },
        brass: { 300: '#efd58f', 400: '#e9c46a', 500: '#c99a2e', 600: '#9c7420' },
        agree: { 100: '#dcefe4', 600: '#2e7d57', 800: '#1d5439' },
        disagree: { 100: '#f7dfd9', 600: '#b2432f', 800: '#7d2a1c' },
      },
    },
  },
} satisfies Config;
