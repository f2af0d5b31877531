/**
 * Test of zero lag-1 autocorrelation: under independence r₁ is approximately normal with mean 0
 * and standard deviation 1/√n, so z = r₁·√n with a two-sided normal p-value (the ±z/√N bands of
 * the NIST/SEMATECH e-Handbook of Statistical Methods, 1.3.5.12 "Autocorrelation").
 */
import { standardNormalCdf } from '../distributions/normal';

export function lag1Test(r1: number, n: number): { statistic: number; pValue: number } {
  const z = r1 * Math.sqrt(n);
  return { statistic: z, pValue: Math.min(1, 2 * standardNormalCdf(-Math.abs(z))) };
}
