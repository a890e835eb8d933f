/**
 * Sensor noise as an EMVA 1288 report gives it (EMVA Standard 1288, Release 4.0, 2021, linear model):
 * read noise σr per analog gain (input-referred, e⁻), dark signal μd = dark current × exposure with its shot
 * noise σ² = μd, quantisation noise σq² = 1/12 DN² referred to electrons through the overall gain K, and the
 * signal's own shot noise. SNR = μe / √(σr² + μd + σq²/K² + μe) (EMVA 1288 R4.0, eq. 15–16 with σd² = σr² + μd).
 * Dark current doubles every `doublingC` degrees (common practice for silicon: 6–8 °C; EMVA 1288 measures it per camera).
 */
import { QUANTIZATION_NOISE_VAR_DN2 } from './sensor.js';
import { ratioToDb } from './units.js';

export interface ReadNoisePoint {
  analogGain: number;
  readNoiseE: number;
}

/** Read noise at a gain: linear between the table's gains, the end values held outside; `flatE` without a table. */
export function readNoiseAtGainE(flatE: number, table: readonly ReadNoisePoint[] | undefined, analogGain: number): number {
  if (!table || table.length === 0) return flatE;
  const first = table[0]!;
  const last = table[table.length - 1]!;
  if (analogGain <= first.analogGain) return first.readNoiseE;
  if (analogGain >= last.analogGain) return last.readNoiseE;
  let i = 1;
  while (table[i]!.analogGain < analogGain) i++;
  const a = table[i - 1]!;
  const b = table[i]!;
  return a.readNoiseE + ((analogGain - a.analogGain) / (b.analogGain - a.analogGain)) * (b.readNoiseE - a.readNoiseE);
}

/** Dark current at a temperature: I(T) = I(T_ref)·2^((T − T_ref)/T_double) (doubling rule, common practice). */
export function darkCurrentAtEPerS(refEPerS: number, refTempC: number, doublingC: number, temperatureC: number): number {
  return refEPerS * 2 ** ((temperatureC - refTempC) / doublingC);
}

/**
 * Quantisation noise in e⁻²: 1/12 DN² at the ADC, plus the coarser steps when only `networkBits` of the
 * `adcBits` reach the network (a step of 2^(adcBits − networkBits) DN adds step²/12 DN², independent of the first).
 * Referred to electrons by dividing by K² (EMVA 1288 R4.0, σq²/K²).
 */
export function quantisationVarianceE2(adcBits: number, networkBits: number | undefined, systemGainDnPerE: number): number {
  const stepDn = networkBits !== undefined && networkBits < adcBits ? 2 ** (adcBits - networkBits) : 0;
  const dn2 = QUANTIZATION_NOISE_VAR_DN2 * (1 + stepDn * stepDn);
  return dn2 / (systemGainDnPerE * systemGainDnPerE);
}

export interface NoiseTerms {
  readNoiseE: number;
  /** Mean dark electrons over the exposure; also its shot-noise variance. */
  darkElectrons: number;
  quantisationVarE2: number;
}

/** SNR of μe signal electrons with the noise terms (EMVA 1288 R4.0 linear model; see the module comment). */
export function snrWithNoise(signalE: number, noise: NoiseTerms): number {
  return signalE / Math.sqrt(noise.readNoiseE * noise.readNoiseE + noise.darkElectrons + noise.quantisationVarE2 + signalE);
}

export function snrDbWithNoise(signalE: number, noise: NoiseTerms): number {
  return ratioToDb(snrWithNoise(signalE, noise));
}
