/** The parts of jStat (npm `jstat`, MIT) the reference tests use; the package ships no type declarations. */
declare module 'jstat' {
  interface Distribution {
    inv(p: number, ...params: number[]): number;
    cdf(x: number, ...params: number[]): number;
  }
  export const jStat: {
    normal: Distribution;
    studentt: Distribution;
  };
}
