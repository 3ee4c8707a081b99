// Runoff depth (mm/d) over a catchment ↔ discharge (m³/s).
// 1 mm/d over 1 km² = 1e-3 m × 1e6 m² / 86 400 s = 1/86.4 m³/s.
const MM_DAY_KM2_PER_M3S = 86.4;

export function mmPerDayToCubicMetresPerSecond(depthMmPerDay: number, areaKm2: number): number {
  return (depthMmPerDay * areaKm2) / MM_DAY_KM2_PER_M3S;
}

export function cubicMetresPerSecondToMmPerDay(flowM3s: number, areaKm2: number): number {
  return (flowM3s * MM_DAY_KM2_PER_M3S) / areaKm2;
}
