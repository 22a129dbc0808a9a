/**
 * Shoebox rooms by the image-source method, reverberation-time estimates and decay analysis.
 *
 * Image-source method (Allen & Berkley, "Image method for efficiently simulating small-room acoustics",
 * JASA 65(4), 1979): the sound reflected by the six rigid-ish walls of a rectangular room equals the
 * free-field sound of mirror-image sources. Along x, the images sit at X = (1 − 2q)·xs + 2m·Lx for q ∈ {0, 1},
 * m ∈ ℤ, and such an image has met the wall x = 0 |m − q| times and the wall x = Lx |m| times; likewise in y
 * and z. Each image contributes
 *
 *   β_x0^|m−q| · β_x1^|m| · β_y0^… · β_z1^… / (4π·d)   at delay d/c,
 *
 * d = distance from image to receiver, c = speed of sound, β = √(1 − α) the pressure reflection coefficient
 * of a wall with (energy) absorption coefficient α. Delays are fractional, realised with a Hann-windowed
 * sinc (Peterson, JASA 80(5), 1986; see fractional-delay.ts), so every image is a band-limited impulse whose
 * taps sum to its amplitude. The result is the pressure at the receiver per unit source strength, sampled at
 * `sampleRate`, without Allen & Berkley's DC-removing high-pass (callers may add one).
 *
 * Absorption per wall is given in the order [x0, x1, y0, y1, z0, z1]: x0 is the wall at x = 0, x1 the wall at
 * x = Lx, and so on (z0 is the floor if z is height).
 */
import { addFractionalDelay, DEFAULT_HALF_WIDTH } from './fractional-delay.ts';

export type Vec3 = readonly [number, number, number];
/** Absorption coefficients of the walls x = 0, x = Lx, y = 0, y = Ly, z = 0, z = Lz. */
export type WallAbsorption = readonly [number, number, number, number, number, number];

export interface RoomGeometry {
  /** Room size [Lx, Ly, Lz] in metres, each > 0. */
  dimensionsM: Vec3;
  /** Energy absorption coefficient α ∈ (0, 1]: one for every wall, or six in the order x0, x1, y0, y1, z0, z1. */
  absorption: number | WallAbsorption;
}

export interface RoomOptions extends RoomGeometry {
  /** Source position in metres, strictly inside the room. */
  source: Vec3;
  /** Receiver position in metres, strictly inside the room. */
  receiver: Vec3;
  /** Sample rate in Hz. */
  sampleRate: number;
  /** Speed of sound in m/s (default 343: dry air at about 20 °C, from the ideal-gas value 331.3·√(1 + θ/273.15) m/s at θ = 20 °C; from memory). */
  speedOfSound?: number;
  /** Highest reflection order kept (total number of wall hits); default: no limit other than the time. */
  maxOrder?: number;
  /**
   * Length of the response in seconds. Default: the Sabine T60 (the time to decay by 60 dB), capped so that
   * at most `maxImages` images fall within that time.
   */
  maxTimeS?: number;
  /** Cost bound used for the default length: the number of images inside the sphere of radius c·t (default 2e6). */
  maxImages?: number;
  /** Half-width of the fractional-delay kernel in samples (default 16). */
  halfWidth?: number;
  /**
   * Optional high-pass cut-off in Hz (0 < f < sampleRate/2): a 2nd-order Butterworth applied to the result.
   * Every image is in phase at 0 Hz, so the raw image sum carries a large, slowly decaying low-frequency
   * component that no loudspeaker could excite; Allen & Berkley (1979) high-pass their responses for the
   * same reason (from memory). Default: none (the raw pressure response).
   */
  highPassHz?: number;
}

/** Largest number of image sources a response may take (10 × the default bound: a few seconds per path). */
export const MAX_ROOM_IMAGES = 2e7;

/** Default cost bound: about 2e6 images × 32 taps, well under a second in Node. */
export const DEFAULT_MAX_IMAGES = 2e6;

/** Sabine's constant 24·ln(10)/c in s/m (0.161 at c = 343 m/s). */
function sabineConstant(speedOfSound: number): number {
  return (24 * Math.LN10) / speedOfSound;
}

function checkPositive(value: number, field: string): void {
  if (!Number.isFinite(value) || value <= 0) throw new RangeError(`${field} must be a finite number > 0, got ${value}`);
}

function checkVec3(v: unknown, field: string): asserts v is Vec3 {
  if (!Array.isArray(v) || v.length !== 3) {
    throw new RangeError(`${field} must be three numbers [x, y, z] in metres, got ${JSON.stringify(v)}`);
  }
}

/** Validate the geometry and expand the absorption to six walls. */
function wallAbsorption(geometry: RoomGeometry): WallAbsorption {
  checkVec3(geometry.dimensionsM, 'dimensionsM');
  geometry.dimensionsM.forEach((l, i) => checkPositive(l, `dimensionsM[${i}]`));
  const a = geometry.absorption;
  let walls: number[];
  if (typeof a === 'number') {
    walls = [a, a, a, a, a, a];
  } else if (Array.isArray(a) && a.length === 6) {
    walls = [...a];
  } else {
    throw new RangeError(
      `absorption must be one number or six numbers [x0, x1, y0, y1, z0, z1], got ${JSON.stringify(a)}`,
    );
  }
  walls.forEach((alpha, i) => {
    if (!Number.isFinite(alpha) || alpha <= 0 || alpha > 1) {
      const name = typeof a === 'number' ? 'absorption' : `absorption[${i}]`;
      throw new RangeError(`${name} must be in (0, 1], got ${alpha}`);
    }
  });
  return walls as unknown as WallAbsorption;
}

/** Volume (m³), total surface (m²) and absorption area Σ S_i·α_i (m²) of a validated room. */
function roomTotals(geometry: RoomGeometry, speedOfSound: number): { volume: number; surface: number; absorptionArea: number } {
  const alpha = wallAbsorption(geometry);
  checkPositive(speedOfSound, 'speedOfSound');
  const [x, y, z] = geometry.dimensionsM;
  const areas = [y * z, y * z, x * z, x * z, x * y, x * y];
  let surface = 0;
  let absorptionArea = 0;
  for (let i = 0; i < 6; i++) {
    surface += areas[i]!;
    absorptionArea += areas[i]! * alpha[i]!;
  }
  return { volume: x * y * z, surface, absorptionArea };
}

/**
 * Sabine reverberation time T60 = 24·ln10·V / (c·Σ S_i·α_i) in seconds (W. C. Sabine, "Reverberation",
 * 1900, reprinted in *Collected Papers on Acoustics*, Harvard University Press, 1922; from memory). At
 * 343 m/s this is 0.161·V/A (calculated).
 */
export function sabineT60(geometry: RoomGeometry, speedOfSound = 343): number {
  const { volume, absorptionArea } = roomTotals(geometry, speedOfSound);
  return (sabineConstant(speedOfSound) * volume) / absorptionArea;
}

/**
 * Eyring reverberation time T60 = 24·ln10·V / (−c·S·ln(1 − ᾱ)) in seconds, ᾱ the area-weighted mean
 * absorption (Eyring, "Reverberation time in 'dead' rooms", JASA 1(2), 1930). Zero when ᾱ = 1.
 */
export function eyringT60(geometry: RoomGeometry, speedOfSound = 343): number {
  const { volume, surface, absorptionArea } = roomTotals(geometry, speedOfSound);
  const mean = absorptionArea / surface;
  if (mean >= 1) return 0;
  return (sabineConstant(speedOfSound) * volume) / (-surface * Math.log(1 - mean));
}

function checkInside(p: unknown, dims: Vec3, field: string): void {
  checkVec3(p, field);
  const axes = ['x', 'y', 'z'];
  for (let i = 0; i < 3; i++) {
    const v = p[i]!;
    if (!Number.isFinite(v) || v <= 0 || v >= dims[i]!) {
      throw new RangeError(`${field}[${i}] (${axes[i]}) must lie strictly inside the room, in (0, ${dims[i]}) m, got ${v}`);
    }
  }
}

/** The response length in seconds used when `maxTimeS` is not given (see RoomOptions.maxTimeS). */
export function defaultRoomTimeS(geometry: RoomGeometry, speedOfSound = 343, maxImages = DEFAULT_MAX_IMAGES): number {
  checkPositive(maxImages, 'maxImages');
  const t60 = sabineT60(geometry, speedOfSound);
  const [x, y, z] = geometry.dimensionsM;
  // Images fill space at one per room volume V, so N(t) ≈ (4/3)·π·(c·t)³ / V.
  const tBudget = Math.cbrt((3 * maxImages * x * y * z) / (4 * Math.PI)) / speedOfSound;
  return Math.min(t60, tBudget);
}

/**
 * Impulse response from source to receiver of a shoebox room (image-source method, see the file comment).
 * Length: ceil(maxTimeS·sampleRate) samples; images arriving later are left out, as are images of
 * order > maxOrder. Amplitude: pressure per unit source strength (the direct sound at d metres sums to
 * 1/(4π·d)).
 */
export function roomImpulseResponse(options: RoomOptions): Float64Array {
  const alpha = wallAbsorption(options);
  const dims = options.dimensionsM;
  const { sampleRate, speedOfSound = 343, halfWidth = DEFAULT_HALF_WIDTH } = options;
  checkPositive(sampleRate, 'sampleRate');
  checkPositive(speedOfSound, 'speedOfSound');
  checkInside(options.source, dims, 'source');
  checkInside(options.receiver, dims, 'receiver');
  if (!Number.isInteger(halfWidth) || halfWidth < 1 || halfWidth > 1024) {
    throw new RangeError(`halfWidth must be an integer from 1 to 1024 samples, got ${halfWidth}`);
  }
  const maxOrder = options.maxOrder ?? Infinity;
  if (maxOrder !== Infinity && (!Number.isInteger(maxOrder) || maxOrder < 0)) {
    throw new RangeError(`maxOrder must be a whole number ≥ 0, got ${maxOrder}`);
  }
  const { highPassHz } = options;
  if (highPassHz !== undefined && (!Number.isFinite(highPassHz) || highPassHz <= 0 || highPassHz >= sampleRate / 2)) {
    throw new RangeError(`highPassHz must be in (0, ${sampleRate / 2}) Hz (below half the sample rate), got ${highPassHz}`);
  }
  const maxTimeS = options.maxTimeS ?? defaultRoomTimeS(options, speedOfSound, options.maxImages ?? DEFAULT_MAX_IMAGES);
  checkPositive(maxTimeS, 'maxTimeS');
  const length = Math.ceil(maxTimeS * sampleRate);
  if (length > 2 ** 27) {
    throw new RangeError(`maxTimeS × sampleRate must be at most 2^27 samples, got ${length}`);
  }
  // Images fill space at one per room volume V: N(t) ≈ (4/3)·π·(c·t)³ / V (fewer with maxOrder, at most
  // about (4/3)·(2·maxOrder + 1)³ / 8 … counted loosely as (2·maxOrder + 1)³). Refuse work that would run
  // for minutes without a word, naming the estimate and the way out.
  const volume = dims[0] * dims[1] * dims[2];
  const bySphere = ((4 / 3) * Math.PI * Math.pow(speedOfSound * maxTimeS, 3)) / volume;
  const estimate = maxOrder === Infinity ? bySphere : Math.min(bySphere, Math.pow(2 * maxOrder + 1, 3));
  if (estimate > MAX_ROOM_IMAGES) {
    throw new RangeError(
      `maxTimeS: ${maxTimeS} s in a room of ${volume.toPrecision(3)} m³ reaches about ${estimate.toExponential(1)} image sources, ` +
        `more than the ${MAX_ROOM_IMAGES.toExponential(0)} this tool computes (minutes of work per path); shorten maxTimeS or set maxOrder`,
    );
  }
  const out = new Float64Array(length);
  const maxDistance = (length / sampleRate) * speedOfSound;
  const samplesPerMetre = sampleRate / speedOfSound;
  const beta = alpha.map((a) => Math.sqrt(1 - a));
  const src = options.source;
  const rcv = options.receiver;

  // Per axis, list every image coordinate within reach, with its reflection count and reflection gain.
  const axes = [0, 1, 2].map((axis) => {
    const l = dims[axis]!;
    const b0 = beta[2 * axis]!;
    const b1 = beta[2 * axis + 1]!;
    const mMax = Math.ceil(maxDistance / (2 * l)) + 1;
    const offsets: number[] = [];
    const orders: number[] = [];
    const gains: number[] = [];
    for (let m = -mMax; m <= mMax; m++) {
      for (let q = 0; q <= 1; q++) {
        const delta = (1 - 2 * q) * src[axis]! + 2 * m * l - rcv[axis]!;
        if (Math.abs(delta) > maxDistance) continue;
        const n0 = Math.abs(m - q);
        const n1 = Math.abs(m);
        if (n0 + n1 > maxOrder) continue;
        offsets.push(delta);
        orders.push(n0 + n1);
        gains.push(b0 ** n0 * b1 ** n1);
      }
    }
    return { offsets, orders, gains };
  });

  const [ax, ay, az] = axes as [(typeof axes)[0], (typeof axes)[0], (typeof axes)[0]];
  const maxD2 = maxDistance * maxDistance;
  for (let i = 0; i < ax.offsets.length; i++) {
    const dx = ax.offsets[i]!;
    const dx2 = dx * dx;
    for (let j = 0; j < ay.offsets.length; j++) {
      const dy = ay.offsets[j]!;
      const dxy2 = dx2 + dy * dy;
      if (dxy2 > maxD2) continue;
      const oxy = ax.orders[i]! + ay.orders[j]!;
      if (oxy > maxOrder) continue;
      const gxy = ax.gains[i]! * ay.gains[j]!;
      for (let k = 0; k < az.offsets.length; k++) {
        if (oxy + az.orders[k]! > maxOrder) continue;
        const dz = az.offsets[k]!;
        const d2 = dxy2 + dz * dz;
        if (d2 > maxD2) continue;
        const gain = gxy * az.gains[k]!;
        if (gain === 0) continue;
        const d = Math.sqrt(d2);
        addFractionalDelay(out, d * samplesPerMetre, gain / (4 * Math.PI * d), halfWidth);
      }
    }
  }
  if (highPassHz !== undefined) butterworthHighPassInPlace(out, highPassHz, sampleRate);
  return out;
}

/**
 * 2nd-order Butterworth high-pass (maximally flat: S. Butterworth, "On the theory of filter amplifiers",
 * Experimental Wireless and the Wireless Engineer 7, 1930), in place, by the bilinear transform with
 * Q = 1/√2 (coefficients from R. Bristow-Johnson, "Cookbook formulae for audio EQ biquad filter
 * coefficients"), direct form I.
 */
function butterworthHighPassInPlace(x: Float64Array, cutoffHz: number, sampleRate: number): void {
  const w0 = (2 * Math.PI * cutoffHz) / sampleRate;
  const cosW = Math.cos(w0);
  const alpha = Math.sin(w0) * Math.SQRT1_2; // sin(w0)/(2Q) with Q = 1/√2
  const a0 = 1 + alpha;
  const b0 = (1 + cosW) / 2 / a0;
  const b1 = -(1 + cosW) / a0;
  const a1 = (-2 * cosW) / a0;
  const a2 = (1 - alpha) / a0;
  let x1 = 0, x2 = 0, y1 = 0, y2 = 0;
  for (let i = 0; i < x.length; i++) {
    const xi = x[i]!;
    const y = b0 * xi + b1 * x1 + b0 * x2 - a1 * y1 - a2 * y2;
    x2 = x1; x1 = xi; y2 = y1; y1 = y;
    x[i] = y;
  }
}

/**
 * Schroeder backward integration (Schroeder, "New method of measuring reverberation time", JASA 37, 1965):
 * E(t) = ∫_t^∞ h²(τ) dτ, returned in dB relative to E(0) (so it starts at 0 dB and falls). Samples after the
 * last non-zero sample read −Infinity.
 */
export function schroederDecayDb(ir: ArrayLike<number>): Float64Array {
  const out = new Float64Array(ir.length);
  let acc = 0;
  for (let i = ir.length - 1; i >= 0; i--) {
    acc += ir[i]! * ir[i]!;
    out[i] = acc;
  }
  const total = out[0] ?? 0;
  if (!(total > 0)) throw new RangeError('ir must contain at least one non-zero sample');
  for (let i = 0; i < out.length; i++) out[i] = 10 * Math.log10(out[i]! / total);
  return out;
}

export interface DecayFit {
  /** Reverberation time extrapolated to 60 dB of decay, in seconds. */
  t60S: number;
  /** Slope of the fitted line in dB/s (negative). */
  slopeDbPerS: number;
  /** Start and end of the fitted range, in seconds from the first sample. */
  startS: number;
  endS: number;
  /** Correlation coefficient of the fit (close to −1 for a clean exponential decay). */
  correlation: number;
}

/**
 * Reverberation time from the Schroeder decay curve, ISO 3382-style: a least-squares line through the
 * part of the curve between −5 dB and −25 dB (T20) or −5 dB and −35 dB (T30), extrapolated to 60 dB
 * (ISO 3382-2:2008, clause 5.3; levels from memory). Throws if the curve never falls that far.
 */
export function reverberationTime(
  ir: ArrayLike<number>,
  sampleRate: number,
  range: 'T20' | 'T30' = 'T30',
): DecayFit {
  checkPositive(sampleRate, 'sampleRate');
  const lowDb = range === 'T20' ? -25 : -35;
  const decay = schroederDecayDb(ir);
  let start = -1;
  let end = -1;
  for (let i = 0; i < decay.length; i++) {
    if (start < 0 && decay[i]! <= -5) start = i;
    if (decay[i]! <= lowDb) {
      end = i;
      break;
    }
  }
  if (start < 0 || end < 0 || end - start < 2) {
    throw new RangeError(`the decay curve must fall below ${lowDb} dB for ${range}; it reaches ${decay[decay.length - 1]} dB`);
  }
  let sx = 0, sy = 0, sxx = 0, sxy = 0, syy = 0;
  const n = end - start + 1;
  for (let i = start; i <= end; i++) {
    const t = i / sampleRate;
    const y = decay[i]!;
    sx += t; sy += y; sxx += t * t; sxy += t * y; syy += y * y;
  }
  const cov = sxy - (sx * sy) / n;
  const varT = sxx - (sx * sx) / n;
  const varY = syy - (sy * sy) / n;
  const slope = cov / varT;
  return {
    t60S: -60 / slope,
    slopeDbPerS: slope,
    startS: start / sampleRate,
    endS: end / sampleRate,
    correlation: cov / Math.sqrt(varT * varY),
  };
}
