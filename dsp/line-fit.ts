/**
 * Weighted straight-line least squares y = a + b·t by running sums (the normal equations of a
 * line; common practice). The one line fit of the analysis: the frequency from the phase slope of
 * a demodulated envelope and the live log-linear rate both use it. Callers shift t to a local
 * origin so the sums stay well conditioned.
 */
export interface LineSums {
  n: number;
  sw: number;
  st: number;
  sy: number;
  stt: number;
  sty: number;
  syy: number;
}

export function createLineSums(): LineSums {
  return { n: 0, sw: 0, st: 0, sy: 0, stt: 0, sty: 0, syy: 0 };
}

export function resetLineSums(l: LineSums): void {
  l.n = 0;
  l.sw = 0;
  l.st = 0;
  l.sy = 0;
  l.stt = 0;
  l.sty = 0;
  l.syy = 0;
}

/** Adds the point (t, y) with weight w. */
export function addLinePoint(l: LineSums, t: number, y: number, w: number): void {
  l.n++;
  l.sw += w;
  l.st += w * t;
  l.sy += w * y;
  l.stt += w * t * t;
  l.sty += w * t * y;
  l.syy += w * y * y;
}

/** Weighted sum of squares of t about its mean (0 or less: no slope). */
export function lineSxx(l: LineSums): number {
  return l.stt - (l.st * l.st) / l.sw;
}

/** Weighted cross sum of t and y about their means. */
export function lineSxy(l: LineSums): number {
  return l.sty - (l.st * l.sy) / l.sw;
}

/** Weighted residual sum of squares of the fitted line with slope b = lineSxy / lineSxx. */
export function lineRss(l: LineSums, slope: number): number {
  return Math.max(0, l.syy - (l.sy * l.sy) / l.sw - slope * lineSxy(l));
}
