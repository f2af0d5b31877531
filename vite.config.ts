// One Vite config for the console build, its dev server, and the vitest projects.
import { defineConfig } from 'vitest/config';
import vue from '@vitejs/plugin-vue';
import tailwindcss from '@tailwindcss/vite';
import { formSchemasPlugin } from './console/build/validators';

const apiTarget = `http://${process.env.HOST ?? '127.0.0.1'}:${process.env.PORT ?? '4780'}`;

export default defineConfig({
  plugins: [vue(), tailwindcss(), formSchemasPlugin()],
  publicDir: 'console/public',
  build: { outDir: 'dist/console', emptyOutDir: true },
  server: {
    port: 5173,
    proxy: {
      '/v1': apiTarget,
      '/docs': apiTarget,
      '/.well-known': apiTarget,
    },
  },
  test: {
    projects: [
      {
        test: {
          name: 'unit',
          include: ['tests/unit/**/*.test.ts', 'tests/engine/**/*.test.ts'],
          environment: 'node',
          testTimeout: 120_000,
        },
      },
      {
        test: {
          name: 'integration',
          include: ['tests/integration/**/*.test.ts'],
          environment: 'node',
          testTimeout: 120_000,
          hookTimeout: 120_000,
          fileParallelism: false,
        },
      },
      {
        plugins: [vue(), formSchemasPlugin()],
        test: {
          name: 'console',
          include: ['tests/console/**/*.test.ts'],
          environment: 'happy-dom',
        },
      },
      {
        test: {
          name: 'browser',
          include: ['tests/browser/**/*.test.ts'],
          environment: 'node',
          // Browser tests run after every other project, on a quiet machine, so their waits mean what they say.
          sequence: { groupOrder: 1 },
          testTimeout: 180_000,
          hookTimeout: 180_000,
          fileParallelism: false,
        },
      },
    ],
  },
});
