/**
 * CIE 1924 photopic luminous efficiency V(λ), 380–780 nm in 10 nm steps (CIE 1926 proceedings;
 * tabulated in Wyszecki & Stiles, "Color Science", 2nd ed., 1982, Table I(3.3.1); identical to the
 * CIE 1931 ȳ colour-matching function). The 555 nm peak (V = 1) comes from the 5 nm table.
 * Between table points V(λ) is interpolated linearly; outside 380–780 nm it is taken as 0.
 */
const V_TABLE_NM = [
  380, 390, 400, 410, 420, 430, 440, 450, 460, 470, 480, 490, 500, 510, 520, 530, 540, 550, 555, 560, 570, 580, 590,
  600, 610, 620, 630, 640, 650, 660, 670, 680, 690, 700, 710, 720, 730, 740, 750, 760, 770, 780,
] as const;
const V_TABLE = [
  0.000039, 0.00012, 0.000396, 0.00121, 0.004, 0.0116, 0.023, 0.038, 0.06, 0.09098, 0.13902, 0.20802, 0.323, 0.503,
  0.71, 0.862, 0.954, 0.99495, 1.0, 0.995, 0.952, 0.87, 0.757, 0.631, 0.503, 0.381, 0.265, 0.175, 0.107, 0.061, 0.032,
  0.017, 0.00821, 0.0041, 0.002091, 0.001047, 0.00052, 0.000249, 0.00012, 0.00006, 0.00003, 0.000015,
] as const;

/** Maximum luminous efficacy of radiation, 683 lm/W at 540 THz (≈555 nm) (SI Brochure, 9th ed., 2019). */
export const LUMINOUS_EFFICACY_LM_PER_W = 683;

/** Photopic luminous efficiency V(λ) at a wavelength, 0 outside 380–780 nm. */
export function photopicEfficiency(wavelengthNm: number): number {
  const last = V_TABLE_NM.length - 1;
  if (!(wavelengthNm >= V_TABLE_NM[0]!) || !(wavelengthNm <= V_TABLE_NM[last]!)) return 0;
  let i = 0;
  while (V_TABLE_NM[i + 1]! < wavelengthNm) i++;
  const x0 = V_TABLE_NM[i]!;
  const x1 = V_TABLE_NM[i + 1]!;
  const t = (wavelengthNm - x0) / (x1 - x0);
  return V_TABLE[i]! + t * (V_TABLE[i + 1]! - V_TABLE[i]!);
}
