import js from '@eslint/js';
import reactHooks from 'eslint-plugin-react-hooks';
import globals from 'globals';
import tseslint from 'typescript-eslint';

// Import direction (docs/decisions): src → shared, server → shared; shared imports neither;
// server/science imports nothing from the rest of the server.
export default tseslint.config(
  { ignores: ['dist/**', 'node_modules/**', 'test-results/**', '.data/**', '.secrets/**'] },
  js.configs.recommended,
  ...tseslint.configs.recommended,
  {
    languageOptions: { globals: { ...globals.node, ...globals.browser } },
    rules: {
      '@typescript-eslint/no-unused-vars': ['error', { argsIgnorePattern: '^_', varsIgnorePattern: '^_' }],
      '@typescript-eslint/no-namespace': 'off',
    },
  },
  {
    files: ['src/**/*.{ts,tsx}'],
    plugins: { 'react-hooks': reactHooks },
    rules: {
      'react-hooks/rules-of-hooks': 'error',
      'react-hooks/exhaustive-deps': 'warn',
      'no-restricted-imports': ['error', { patterns: [{ group: ['**/server/**'], message: 'The client talks to the API, never to server code.' }] }],
    },
  },
  {
    files: ['shared/**/*.ts'],
    rules: {
      'no-restricted-imports': ['error', { patterns: [{ group: ['**/server/**', '**/src/**', 'react', 'express', 'typeorm'], message: 'shared/ holds contracts only.' }] }],
    },
  },
  {
    files: ['server/science/**/*.ts'],
    rules: {
      'no-restricted-imports': ['error', {
        patterns: [{ group: ['**/db/**', '**/http/**', '**/auth/**', 'express', 'typeorm', 'pg', 'node:fs', 'fs'], message: 'server/science is pure: no I/O, no HTTP, no database.' }],
      }],
    },
  },
);
