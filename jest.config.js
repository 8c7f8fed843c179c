// One jest run, several projects. `npm test` (scripts/test.mjs) starts PostgreSQL
// first and passes its URL in WHITECAP_DATABASE_URL to the integration projects.
const tsNode = {
  '^.+\\.ts$': ['ts-jest', { tsconfig: '<rootDir>/tsconfig.spec.json' }],
};

/** @type {import('jest').Config} */
module.exports = {
  projects: [
    {
      displayName: 'shared',
      testEnvironment: 'node',
      roots: ['<rootDir>/shared'],
      testMatch: ['**/*.spec.ts'],
      transform: tsNode,
    },
    {
      displayName: 'ingest',
      testEnvironment: 'node',
      roots: ['<rootDir>/ingest', '<rootDir>/simulators'],
      testMatch: ['**/*.spec.ts'],
      transform: tsNode,
    },
    {
      displayName: 'integration',
      testEnvironment: 'node',
      roots: ['<rootDir>/test/integration'],
      testMatch: ['**/*.test.ts'],
      transform: tsNode,
    },
    {
      displayName: 'faults',
      testEnvironment: 'node',
      roots: ['<rootDir>/test/faults'],
      testMatch: ['**/*.test.ts'],
      transform: tsNode,
    },
    {
      displayName: 'hostile',
      testEnvironment: 'node',
      roots: ['<rootDir>/test/hostile'],
      testMatch: ['**/*.test.ts'],
      transform: tsNode,
    },
    {
      displayName: 'dashboard',
      preset: 'jest-preset-angular',
      roots: ['<rootDir>/dashboard'],
      testMatch: ['**/*.spec.ts'],
      setupFilesAfterEnv: ['<rootDir>/dashboard/jest-setup.ts'],
      transform: {
        '^.+\\.(ts|mjs|js|html)$': [
          'jest-preset-angular',
          { tsconfig: '<rootDir>/dashboard/tsconfig.spec.json', stringifyContentPathRegex: '\\.(html|svg)$' },
        ],
      },
      transformIgnorePatterns: ['node_modules/(?!.*\\.mjs$)'],
    },
    {
      displayName: 'browser',
      testEnvironment: 'node',
      roots: ['<rootDir>/test/browser'],
      testMatch: ['**/*.test.ts'],
      transform: tsNode,
    },
  ],
};
