// Minimal types for jstat 1.9.6 (the npm package ships none); only what the tests use.
declare module 'jstat' {
  const pkg: unknown;
  export default pkg;
}
