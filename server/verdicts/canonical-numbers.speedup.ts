// Speed-up: the canonical (RFC 8785) text of an array made only of finite numbers — a lot's
// measurements and tares — written by hand instead of by the `canonicalize` package. It gives
// exactly what JSON.stringify gives, and JSON.stringify of a finite number is RFC 8785's form for it
// (ECMAScript Number serialisation, §3.2.2.3; -0 becomes 0). canonical.ts uses it for every such
// array longer than 8; tests/unit/canonical-numbers.test.ts and tests/integration/ledger.test.ts
// check it against JSON.stringify and the reference package.
// Measured gain (issue 13, 2026-12-03, `BENCH_ONLY=bare,big npm run bench:api`, 2 shared cores at
// load 9–10, against the same server writing these arrays with `canonicalize`): interleaved runs,
// the 1 000 000-measurement lot end to end (median of 5) 1 000, 1 111, 1 967 ms with it against
// 2 525, 2 532, 2 556 ms without (2.99, 7.77, 9.37 against 15.03, 15.73, 10.78 × JSON.parse);
// side by side in one run (7 alternating lots), median 938 ms against 2 143 ms. Alone, a million
// measurements take 36 ms here against 490 ms. For a 50-measurement lot it saves ≈ 6 µs of ≈ 2 ms,
// within the noise of `BENCH_ONLY=bare,api` (pairs −15 %, +2 %, −11 %): it pays its way on big lots.

let scratch = Buffer.allocUnsafe(1 << 16);
const digits = new Uint8Array(24);

// Lookup tables for the digits of 0…999: INT[4·i…] is the length then the digits of i (no
// leading zeros); FRAC[4·f…] is the count then the decimals of f/1000 without trailing zeros
// (count 0 for f = 0).
const INT = new Uint8Array(4000);
const FRAC = new Uint8Array(4000);
for (let i = 0; i < 1000; i++) {
  const s = String(i);
  INT[4 * i] = s.length;
  for (let j = 0; j < s.length; j++) INT[4 * i + 1 + j] = s.charCodeAt(j);
  const f = i === 0 ? '' : String(i).padStart(3, '0').replace(/0+$/, '');
  FRAC[4 * i] = f.length;
  for (let j = 0; j < f.length; j++) FRAC[4 * i + 1 + j] = f.charCodeAt(j);
}

/**
 * JSON.stringify(a) for an array of finite numbers, several times faster for measurements
 * with up to three decimals (JSON.stringify of a million such doubles takes longer than parsing
 * them). Why it is the same text: let k = Math.round(v·1000). When |k| < 10^15 and k / 1000 === v,
 * v is the double nearest to the decimal D = k/1000 (k and 1000 are exact, and IEEE division
 * rounds correctly), and D has at most 15 significant digits. Distinct decimals of at most 15
 * significant digits never share a double, so D (without trailing zeros) is the one shortest
 * digit string that reads back as v — which is what ECMAScript's Number::toString prints, in
 * plain notation because 0.001 ≤ |v| < 10^12 (or v = 0; -0 prints as 0 in both). Every other
 * value is written by JSON.stringify itself.
 */
export function numberArrayJson(a: ArrayLike<number>): string {
  const b = numberArrayJsonOrNull(a);
  // not only finite numbers: JSON.stringify's text (null for a non-finite number)
  return b ? b.toString('latin1') : JSON.stringify(Array.from(a));
}

/** The bytes of numberArrayJson(a) (ASCII), in a buffer of their own; null when a holds anything
 *  but finite numbers. */
export function numberArrayJsonOrNull(a: ArrayLike<unknown>): Buffer | null {
  const n = a.length;
  // Typical measurements (up to 3 integer digits and 3 decimals, and a comma) need 8 bytes each.
  let buf = scratch.length >= 8 * n + 64 ? scratch : (scratch = Buffer.allocUnsafe(8 * n + 64));
  let p = 0;
  buf[p++] = 0x5b; // [
  for (let i = 0; i < n; i++) {
    if (p + 40 > buf.length) {
      const bigger = Buffer.allocUnsafe(buf.length * 2);
      buf.copy(bigger, 0, 0, p);
      buf = scratch = bigger;
    }
    if (i > 0) buf[p++] = 0x2c; // ,
    const v = a[i] as number;
    const k = Math.round(v * 1000);
    if (k / 1000 === v && k < 1e15 && k > -1e15) {
      let ak = k;
      if (k < 0) {
        ak = -k;
        buf[p++] = 0x2d; // -
      }
      let ip = Math.floor(ak / 1000);
      const fr = ak - ip * 1000;
      if (ip < 1000) {
        const o = 4 * ip;
        const len = INT[o]!;
        buf[p] = INT[o + 1]!;
        if (len > 1) buf[p + 1] = INT[o + 2]!;
        if (len > 2) buf[p + 2] = INT[o + 3]!;
        p += len;
      } else {
        let t = 0;
        do {
          const q = Math.floor(ip / 10);
          digits[t++] = 0x30 + (ip - q * 10);
          ip = q;
        } while (ip > 0);
        while (t > 0) buf[p++] = digits[--t]!;
      }
      const f = 4 * fr;
      const flen = FRAC[f]!;
      if (flen > 0) {
        buf[p] = 0x2e; // .
        buf[p + 1] = FRAC[f + 1]!;
        if (flen > 1) buf[p + 2] = FRAC[f + 2]!;
        if (flen > 2) buf[p + 3] = FRAC[f + 3]!;
        p += flen + 1;
      }
    } else {
      // (the fast path above takes only numbers: k / 1000 === v is false for anything else)
      if (typeof v !== 'number' || !Number.isFinite(v)) return null;
      p += buf.write(JSON.stringify(v), p, 'latin1');
    }
  }
  buf[p++] = 0x5d; // ]
  let out: Buffer;
  if (buf.length > 1 << 20) {
    // A big buffer is handed over (the bytes are not copied) and not kept for the next call.
    out = buf.subarray(0, p);
    scratch = Buffer.allocUnsafe(1 << 16);
  } else {
    out = Buffer.from(buf.subarray(0, p));
  }
  return out;
}
