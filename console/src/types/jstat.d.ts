// jstat ships no type declarations; the console uses only its densities (see src/lib/tdist.ts).
declare module 'jstat' {
  const jstat: unknown;
  export default jstat;
}
