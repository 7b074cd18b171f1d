/**
 * Small statistics and linear-algebra helpers shared by the fits (fit.ts, fit-saturation.ts), the
 * noise-statistics estimators, the Cramér–Rao bounds and the app's stability map: normal and
 * chi-square quantiles, the log-gamma function, the regularised incomplete beta function, Student's
 * t distribution, the inverse of a small matrix, the solution of a small linear system and
 * order statistics (kthSmallest).
 */

/** Standard normal 0.975 quantile (Abramowitz & Stegun 1964, Table 26.5). */
export const Z_975 = 1.959963984540054;

/** 0.99 quantile of the chi-square distribution with 1 degree of freedom (= 2.5758²; A&S Table 26.8). */
export const CHI2_1DOF_99 = 6.634896601021214;

/** Coefficients of the Lanczos approximation, g = 7, 9 terms. */
const LANCZOS = [
  0.99999999999980993, 676.5203681218851, -1259.1392167224028, 771.32342877765313, -176.61502916214059,
  12.507343278686905, -0.13857109526572012, 9.9843695780195716e-6, 1.5056327351493116e-7,
];

/** Natural log of the gamma function, x > 0 (Lanczos 1964 approximation, g = 7, 9 terms). */
export function logGamma(x: number): number {
  const c = LANCZOS;
  if (x < 0.5) return Math.log(Math.PI / Math.abs(Math.sin(Math.PI * x))) - logGamma(1 - x);
  const xx = x - 1;
  let a = c[0];
  const t = xx + 7.5;
  for (let i = 1; i < 9; i++) a += c[i] / (xx + i);
  return 0.5 * Math.log(2 * Math.PI) + (xx + 0.5) * Math.log(t) - t + Math.log(a);
}

/** Continued fraction of the incomplete beta function (modified Lentz; Press et al. 2007, Numerical Recipes 3rd ed., §6.4). */
function betaContinuedFraction(a: number, b: number, x: number): number {
  const tiny = 1e-300;
  let c = 1;
  let d = 1 - ((a + b) * x) / (a + 1);
  if (Math.abs(d) < tiny) d = tiny;
  d = 1 / d;
  let h = d;
  for (let m = 1; m <= 300; m++) {
    const m2 = 2 * m;
    let aa = (m * (b - m) * x) / ((a + m2 - 1) * (a + m2));
    d = 1 + aa * d;
    if (Math.abs(d) < tiny) d = tiny;
    c = 1 + aa / c;
    if (Math.abs(c) < tiny) c = tiny;
    d = 1 / d;
    h *= d * c;
    aa = (-(a + m) * (a + b + m) * x) / ((a + m2) * (a + m2 + 1));
    d = 1 + aa * d;
    if (Math.abs(d) < tiny) d = tiny;
    c = 1 + aa / c;
    if (Math.abs(c) < tiny) c = tiny;
    d = 1 / d;
    const del = d * c;
    h *= del;
    if (Math.abs(del - 1) < 1e-15) break;
  }
  return h;
}

/** ln Γ(a + b) − ln Γ(a) − ln Γ(b) = −ln B(a, b), the part of the incomplete beta function's front factor that x does not change. */
function lnInverseBeta(a: number, b: number): number {
  return logGamma(a + b) - logGamma(a) - logGamma(b);
}

/** Regularised incomplete beta I_x(a, b), 0 ≤ x ≤ 1 (Press et al. 2007, Numerical Recipes, §6.4). */
export function incompleteBeta(x: number, a: number, b: number): number {
  if (x <= 0) return 0;
  if (x >= 1) return 1;
  return incompleteBetaFrom(x, a, b, lnInverseBeta(a, b));
}

/** incompleteBeta with −ln B(a, b) given (lnInverseBeta; a caller that varies x only computes it once), 0 < x < 1. */
function incompleteBetaFrom(x: number, a: number, b: number, lnInvBeta: number): number {
  const lnFront = lnInvBeta + a * Math.log(x) + b * Math.log(1 - x);
  if (x < (a + 1) / (a + b + 2)) return (Math.exp(lnFront) * betaContinuedFraction(a, b, x)) / a;
  return 1 - (Math.exp(lnFront) * betaContinuedFraction(b, a, 1 - x)) / b;
}

/** Student-t cumulative distribution P(T ≤ t) for ν > 0 degrees of freedom (A&S 1964, 26.7.1 via 26.5.27). */
export function studentTCdf(t: number, dof: number): number {
  return studentTCdfFrom(t, dof, lnInverseBeta(dof / 2, 0.5));
}

/** studentTCdf with lnInverseBeta(ν/2, 1/2) given. */
function studentTCdfFrom(t: number, dof: number, lnInvBeta: number): number {
  const x = dof / (dof + t * t);
  const tail = 0.5 * (x <= 0 ? 0 : x >= 1 ? 1 : incompleteBetaFrom(x, dof / 2, 0.5, lnInvBeta));
  return t >= 0 ? 1 - tail : tail;
}

/**
 * Quantile of the Student-t distribution (p in (0.5, 1)), ν > 0 (real ν allowed): Newton's method
 * on the CDF with the density f(t) = Γ((ν+1)/2)/(√(νπ) Γ(ν/2))·(1 + t²/ν)^(−(ν+1)/2) (A&S 1964,
 * 26.7.1), kept inside a bracket that bisection narrows whenever a Newton step would leave it.
 */
export function studentTQuantile(p: number, dof: number): number {
  if (!(dof > 0)) return Number.NaN;
  // The CDF's beta-function factor does not depend on t: computed once for every CDF below.
  const lnInvBeta = lnInverseBeta(dof / 2, 0.5);
  let lo = 0;
  let hi = 1;
  // The CDF at hi/2, the last bracket end tried (NaN while there is none): the first Newton point.
  let cdfHalf = Number.NaN;
  for (let cdf = studentTCdfFrom(hi, dof, lnInvBeta); cdf < p && hi < 1e12; cdf = studentTCdfFrom(hi, dof, lnInvBeta)) {
    hi *= 2;
    cdfHalf = cdf;
  }
  const logNorm = logGamma((dof + 1) / 2) - logGamma(dof / 2) - 0.5 * Math.log(dof * Math.PI);
  let t = 0.5 * (lo + hi);
  for (let i = 0; i < 200; i++) {
    const excess = (i === 0 && !Number.isNaN(cdfHalf) ? cdfHalf : studentTCdfFrom(t, dof, lnInvBeta)) - p;
    if (excess === 0) return t;
    if (excess < 0) lo = t;
    else hi = t;
    const density = Math.exp(logNorm - ((dof + 1) / 2) * Math.log1p((t * t) / dof));
    let next = t - excess / density;
    if (!(next > lo && next < hi)) next = 0.5 * (lo + hi);
    if (Math.abs(next - t) <= 1e-14 * next || hi - lo <= 1e-14 * hi) return next;
    t = next;
  }
  return t;
}

/** Inverts a small symmetric positive-definite matrix (row-major, size k) by Gauss–Jordan with pivoting; null if singular. */
export function invertSmallMatrix(m: Float64Array, k: number): Float64Array | null {
  const a = Float64Array.from(m);
  const inv = new Float64Array(k * k);
  for (let i = 0; i < k; i++) inv[i * k + i] = 1;
  for (let col = 0; col < k; col++) {
    let piv = col;
    for (let r = col + 1; r < k; r++) if (Math.abs(a[r * k + col]) > Math.abs(a[piv * k + col])) piv = r;
    const pv = a[piv * k + col];
    if (!(Math.abs(pv) > 0) || !Number.isFinite(pv)) return null;
    if (piv !== col) {
      for (let j = 0; j < k; j++) {
        let tmp = a[col * k + j];
        a[col * k + j] = a[piv * k + j];
        a[piv * k + j] = tmp;
        tmp = inv[col * k + j];
        inv[col * k + j] = inv[piv * k + j];
        inv[piv * k + j] = tmp;
      }
    }
    for (let j = 0; j < k; j++) {
      a[col * k + j] /= pv;
      inv[col * k + j] /= pv;
    }
    for (let r = 0; r < k; r++) {
      if (r === col) continue;
      const f = a[r * k + col];
      if (f === 0) continue;
      for (let j = 0; j < k; j++) {
        a[r * k + j] -= f * a[col * k + j];
        inv[r * k + j] -= f * inv[col * k + j];
      }
    }
  }
  return inv;
}

/** k-th smallest (from 0) of a[0..n), reordering a in place (Hoare's selection, Hoare 1961, "Algorithm 65: Find"); allocates nothing. */
export function kthSmallest(a: Float64Array, n: number, k: number): number {
  let lo = 0;
  let hi = n - 1;
  while (lo < hi) {
    const pivot = a[(lo + hi) >> 1];
    let i = lo;
    let j = hi;
    while (i <= j) {
      while (a[i] < pivot) i++;
      while (a[j] > pivot) j--;
      if (i <= j) {
        const t = a[i];
        a[i] = a[j];
        a[j] = t;
        i++;
        j--;
      }
    }
    if (k <= j) hi = j;
    else if (k >= i) lo = i;
    else return a[k];
  }
  return a[k];
}

/**
 * Solves the small system A·x = b (row-major A of size k) in place by Gaussian elimination with
 * partial pivoting (Press et al. 2007, Numerical Recipes, §2.1–2.3): `a` and `b` are overwritten
 * and x is left in `b`. False when A is singular (a zero or non-finite pivot, as invertSmallMatrix).
 */
export function solveSmallSystem(a: Float64Array, b: Float64Array, k: number): boolean {
  for (let col = 0; col < k; col++) {
    let piv = col;
    for (let r = col + 1; r < k; r++) if (Math.abs(a[r * k + col]) > Math.abs(a[piv * k + col])) piv = r;
    const pv = a[piv * k + col];
    if (!(Math.abs(pv) > 0) || !Number.isFinite(pv)) return false;
    if (piv !== col) {
      for (let j = col; j < k; j++) {
        const tmp = a[col * k + j];
        a[col * k + j] = a[piv * k + j];
        a[piv * k + j] = tmp;
      }
      const tmp = b[col];
      b[col] = b[piv];
      b[piv] = tmp;
    }
    for (let r = col + 1; r < k; r++) {
      const f = a[r * k + col] / pv;
      if (f === 0) continue;
      for (let j = col; j < k; j++) a[r * k + j] -= f * a[col * k + j];
      b[r] -= f * b[col];
    }
  }
  for (let r = k - 1; r >= 0; r--) {
    let sum = b[r];
    for (let j = r + 1; j < k; j++) sum -= a[r * k + j] * b[j];
    b[r] = sum / a[r * k + r];
  }
  return true;
}
