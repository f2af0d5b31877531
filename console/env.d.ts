/// <reference types="vite/client" />
declare module '*.vue' {
  import type { DefineComponent } from 'vue';
  const component: DefineComponent<object, object, unknown>;
  export default component;
}

/** Validators generated at build time from the API's component schemas (console/build/validators.ts). */
declare module 'virtual:lotproof-form-schemas' {
  interface ValidateFunction {
    (data: unknown): boolean;
    errors?: Array<{ instancePath: string; keyword: string; message?: string; params: Record<string, unknown> }> | null;
  }
  export const ProductInput: ValidateFunction;
  export const WebhookInput: ValidateFunction;
}
