/**
 * Unit conversions: the only place in Ocellus where a quantity changes unit.
 * SI prefixes (BIPM SI Brochure, 9th edition); memory sizes use binary KiB (IEC 80000-13);
 * bandwidths and flash read rates use decimal GB and MB, as data sheets quote them (common practice).
 */

export const MM_PER_M = 1_000;
export const UM_PER_MM = 1_000;
export const NM_PER_UM = 1_000;
export const US_PER_MS = 1_000;
export const MS_PER_S = 1_000;
export const PJ_PER_MJ = 1e9;
export const BYTES_PER_KIB = 1_024;
export const BYTES_PER_MB = 1e6;
export const BYTES_PER_GB = 1e9;
export const HZ_PER_MHZ = 1e6;
export const MW_PER_W = 1_000;
export const MJ_PER_J = 1_000;
/** 1 W/m² = 10⁶ µW / 10⁴ cm² = 100 µW/cm². */
export const UW_CM2_PER_W_M2 = 100;

// Length
export const mToMm = (m: number): number => m * MM_PER_M;
export const mmToM = (mm: number): number => mm / MM_PER_M;
export const umToMm = (um: number): number => um / UM_PER_MM;
export const mmToUm = (mm: number): number => mm * UM_PER_MM;
export const nmToUm = (nm: number): number => nm / NM_PER_UM;
export const nmToMm = (nm: number): number => nm / (NM_PER_UM * UM_PER_MM);
export const nmToM = (nm: number): number => nm * 1e-9;
export const umToM = (um: number): number => um * 1e-6;
export const um2ToM2 = (um2: number): number => um2 * 1e-12;

// Time
export const usToS = (us: number): number => us * 1e-6;
export const usToMs = (us: number): number => us / US_PER_MS;
export const msToUs = (ms: number): number => ms * US_PER_MS;
export const msToS = (ms: number): number => ms / MS_PER_S;
export const sToMs = (s: number): number => s * MS_PER_S;
export const sToUs = (s: number): number => s * 1e6;

// Energy and power
export const pjToMj = (pj: number): number => pj / PJ_PER_MJ;
export const mjToJ = (mj: number): number => mj / MJ_PER_J;
export const mwToW = (mw: number): number => mw / MW_PER_W;
/** mW × ms = µJ; returned in mJ. */
export const mwMsToMj = (mw: number, ms: number): number => (mw * ms) / 1_000;

// Memory and rates
export const kibToBytes = (kib: number): number => kib * BYTES_PER_KIB;
export const bytesToKib = (bytes: number): number => bytes / BYTES_PER_KIB;
export const gbPerSToBytesPerS = (gbPerS: number): number => gbPerS * BYTES_PER_GB;
export const mbPerSToBytesPerS = (mbPerS: number): number => mbPerS * BYTES_PER_MB;
export const mhzToHz = (mhz: number): number => mhz * HZ_PER_MHZ;

// Radiometry
export const wM2ToUwCm2 = (wM2: number): number => wM2 * UW_CM2_PER_W_M2;
export const uwCm2ToWM2 = (uwCm2: number): number => uwCm2 / UW_CM2_PER_W_M2;

// Angles and ratios
export const degToRad = (deg: number): number => (deg * Math.PI) / 180;
export const radToDeg = (rad: number): number => (rad * 180) / Math.PI;
/** Amplitude ratio in decibels: 20·log10(ratio) (IEC 60027-3 field quantity). */
export const ratioToDb = (ratio: number): number => 20 * Math.log10(ratio);
export const dbToRatio = (db: number): number => 10 ** (db / 20);

// Focus and camera controls
/** Dioptre = reciprocal metre (ISO 80000-3 uses m⁻¹ for vergence; common practice in optics); 0 D is focus at infinity. */
export const mToDioptres = (m: number): number => 1 / m;
export const dioptresToM = (dioptres: number): number => (dioptres === 0 ? Infinity : 1 / dioptres);
/** V4L2 `exposure_time_absolute` counts 100 µs units (Linux kernel V4L2 camera control reference, V4L2_CID_EXPOSURE_ABSOLUTE). */
export const V4L2_EXPOSURE_UNIT_US = 100;
export const usToV4l2ExposureUnits = (us: number): number => us / V4L2_EXPOSURE_UNIT_US;
export const v4l2ExposureUnitsToUs = (units: number): number => units * V4L2_EXPOSURE_UNIT_US;
