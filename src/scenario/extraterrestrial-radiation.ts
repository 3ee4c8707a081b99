// Daily extraterrestrial radiation Ra (MJ m⁻² d⁻¹) from latitude and day of year,
// FAO Irrigation and Drainage Paper 56 (Allen, Pereira, Raes & Smith 1998), eqs. 21–25:
//   Ra = (24·60/π) Gsc dr [ωs sin φ sin δ + cos φ cos δ sin ωs]        (eq. 21)
//   dr = 1 + 0.033 cos(2π J / 365)                                    (eq. 23)
//   δ  = 0.409 sin(2π J / 365 − 1.39)                                 (eq. 24)
//   ωs = arccos(−tan φ tan δ)                                         (eq. 25)
// with Gsc = 0.0820 MJ m⁻² min⁻¹. The arccos argument is clipped to [−1, 1] so polar day/night
// give ωs = π / 0 instead of NaN (FAO-56 gives eqs. 26–27 for the same purpose).

const SOLAR_CONSTANT = 0.082; // MJ m⁻² min⁻¹

export function extraterrestrialRadiation(latitudeDeg: number, dayOfYear: number): number {
  const phi = (latitudeDeg * Math.PI) / 180;
  const angle = (2 * Math.PI * dayOfYear) / 365;
  const dr = 1 + 0.033 * Math.cos(angle);
  const delta = 0.409 * Math.sin(angle - 1.39);
  const x = Math.max(-1, Math.min(1, -Math.tan(phi) * Math.tan(delta)));
  const ws = Math.acos(x);
  const ra =
    ((24 * 60) / Math.PI) * SOLAR_CONSTANT * dr * (ws * Math.sin(phi) * Math.sin(delta) + Math.cos(phi) * Math.cos(delta) * Math.sin(ws));
  return Math.max(0, ra);
}
