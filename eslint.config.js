import js from '@eslint/js';
import tseslint from 'typescript-eslint';
import layers from './eslint/layers.js';

export default tseslint.config(
  { ignores: ['node_modules/**', 'dist/**', 'demo/out/**', 'schemas/**', 'coverage/**'] },
  js.configs.recommended,
  ...tseslint.configs.recommended,
  {
    files: ['**/*.js'],
    languageOptions: { globals: { process: 'readonly', console: 'readonly' } },
  },
  {
    files: ['bin/**/*.js', 'bin/**/*.mjs'],
    languageOptions: { globals: { process: 'readonly', console: 'readonly', URL: 'readonly' } },
  },
  {
    files: ['src/**/*.ts', 'bench/**/*.ts'],
    plugins: { layers },
    rules: { 'layers/allowed-imports': 'error' },
  },
  {
    rules: {
      '@typescript-eslint/no-unused-vars': ['error', { argsIgnorePattern: '^_', varsIgnorePattern: '^_' }],
    },
  },
);
