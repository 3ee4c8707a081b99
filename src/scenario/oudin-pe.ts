// Temperature-based potential evaporation of Oudin et al. (2005, J. Hydrol. 303, 290–306, eq. 3,
// numbering from memory), with their retained constants K1 = 100 °C, K2 = 5 °C:
//   PE = Re / (λ ρ) · (Ta + K2) / K1   if Ta + K2 > 0, else 0
// Re extraterrestrial radiation (MJ m⁻² d⁻¹), λ = 2.45 MJ kg⁻¹, ρ = 1000 kg m⁻³; the result in
// m/d is converted to mm/d.
import { extraterrestrialRadiation } from './extraterrestrial-radiation.ts';

const LATENT_HEAT = 2.45; // MJ kg⁻¹
const WATER_DENSITY = 1000; // kg m⁻³
const K1 = 100;
const K2 = 5;

/** PE (mm/d) from Re (MJ m⁻² d⁻¹) and mean air temperature (°C). */
export function oudinPe(radiation: number, airTemperature: number): number {
  if (airTemperature + K2 <= 0) return 0;
  return ((radiation / (LATENT_HEAT * WATER_DENSITY)) * ((airTemperature + K2) / K1)) * 1000;
}

/** PE (mm/d) from latitude, day of year (1–366) and mean air temperature (°C). */
export function oudinPeAt(latitudeDeg: number, dayOfYear: number, airTemperature: number): number {
  return oudinPe(extraterrestrialRadiation(latitudeDeg, dayOfYear), airTemperature);
}
