import { describe, expect, it } from 'vitest';
import {
  bytesToKib,
  gbPerSToBytesPerS,
  kibToBytes,
  mbPerSToBytesPerS,
  mhzToHz,
  mToMm,
  mwMsToMj,
  pjToMj,
  ratioToDb,
  sensorDiagonalMm,
  umToMm,
  usToMs,
  usToS,
  uwCm2ToWM2,
  wM2ToUwCm2,
} from '../../src/physics/index.js';

describe('unit conversions (SI Brochure, 9th ed., prefixes; IEC 80000-13 binary prefixes)', () => {
  it('lengths and times', () => {
    expect(mToMm(1.5)).toBe(1_500);
    expect(umToMm(3)).toBeCloseTo(0.003, 15);
    expect(usToMs(2_500)).toBe(2.5);
    expect(usToS(2_500)).toBeCloseTo(0.0025, 15);
  });

  it('energy: 1 pJ is 10⁻⁹ mJ; 1 mW for 1 ms is 1 µJ = 0.001 mJ', () => {
    expect(pjToMj(1e9)).toBe(1);
    expect(mwMsToMj(1, 1)).toBe(0.001);
  });

  it('memory is binary (1 KiB = 1,024 bytes, IEC 80000-13); bandwidth is decimal (1 GB/s = 10⁹ B/s, common practice for data sheets)', () => {
    expect(kibToBytes(2)).toBe(2_048);
    expect(bytesToKib(4_096)).toBe(4);
    expect(gbPerSToBytesPerS(1.5)).toBe(1.5e9);
    expect(mbPerSToBytesPerS(100)).toBe(1e8);
    expect(mhzToHz(800)).toBe(8e8);
  });

  it('irradiance: 1 W/m² = 100 µW/cm²', () => {
    expect(wM2ToUwCm2(1)).toBe(100);
    expect(uwCm2ToWM2(100)).toBe(1);
  });

  it('amplitude ratios in decibels: a ratio of 10 is 20 dB, 100 is 40 dB (IEC 60027-3)', () => {
    expect(ratioToDb(10)).toBeCloseTo(20, 12);
    expect(ratioToDb(100)).toBeCloseTo(40, 12);
  });

  it('a 36 × 24 mm frame has a 43.27 mm diagonal (Pythagoras; common practice figure)', () => {
    expect(sensorDiagonalMm(36, 24)).toBeCloseTo(43.267, 3);
  });
});
