/**
 * Incremental straight-line fit with O(1) add and remove, for points that arrive live and for
 * sliding windows. Keeps weighted running means and centred co-moments (West's 1979 weighted
 * update of Welford's method), so it does not lose digits the way raw Σx, Σx² sums do.
 */
import { lineFromMoments, type LineFit } from './line-fit.js';

export class LineAccumulator {
  private count = 0;
  private sumW = 0;
  private mx = 0;
  private my = 0;
  private cxx = 0;
  private cxy = 0;
  private cyy = 0;
  private readonly weighted: boolean;
  private readonly absoluteWeights: boolean;

  /** @param weighted whether add() will be given weights 1/σ² (otherwise every weight is 1). */
  constructor(options: { weighted?: boolean; absoluteWeights?: boolean } = {}) {
    this.weighted = options.weighted ?? false;
    this.absoluteWeights = options.absoluteWeights ?? false;
  }

  get n(): number {
    return this.count;
  }

  /** Adds one point; w is its weight 1/σ² (ignored, taken as 1, for an unweighted accumulator). */
  add(x: number, y: number, w = 1): void {
    if (!this.weighted) w = 1;
    if (!(w > 0)) return;
    const sumW = this.sumW + w;
    const dx = x - this.mx;
    const dy = y - this.my;
    const mx = this.mx + (w * dx) / sumW;
    const my = this.my + (w * dy) / sumW;
    this.cxx += w * dx * (x - mx);
    this.cxy += w * dx * (y - my);
    this.cyy += w * dy * (y - my);
    this.mx = mx;
    this.my = my;
    this.sumW = sumW;
    this.count++;
  }

  /** Removes a point previously added with the same x, y and w. */
  remove(x: number, y: number, w = 1): void {
    if (!this.weighted) w = 1;
    if (!(w > 0) || this.count === 0) return;
    if (this.count === 1) {
      this.reset();
      return;
    }
    const sumW = this.sumW - w;
    const mx = (this.sumW * this.mx - w * x) / sumW;
    const my = (this.sumW * this.my - w * y) / sumW;
    this.cxx -= w * (x - mx) * (x - this.mx);
    this.cxy -= w * (x - mx) * (y - this.my);
    this.cyy -= w * (y - my) * (y - this.my);
    this.mx = mx;
    this.my = my;
    this.sumW = sumW;
    this.count--;
  }

  reset(): void {
    this.count = 0;
    this.sumW = 0;
    this.mx = 0;
    this.my = 0;
    this.cxx = 0;
    this.cxy = 0;
    this.cyy = 0;
  }

  /** The current fit. Throws the same coded errors as fitLine when it is not yet defined. */
  fit(): LineFit {
    const sse = this.cxx > 0 ? this.cyy - (this.cxy * this.cxy) / this.cxx : 0;
    return lineFromMoments({
      n: this.count,
      sumW: this.sumW,
      meanX: this.mx,
      meanY: this.my,
      sxx: this.cxx,
      sxy: this.cxy,
      syy: this.cyy,
      sse,
      weighted: this.weighted,
      absoluteWeights: this.absoluteWeights,
    });
  }
}
