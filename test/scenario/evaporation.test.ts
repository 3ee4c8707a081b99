import { describe, expect, it } from 'vitest';
import { extraterrestrialRadiation } from '../../src/scenario/extraterrestrial-radiation.ts';
import { oudinPe, oudinPeAt } from '../../src/scenario/oudin-pe.ts';
import { cubicMetresPerSecondToMmPerDay, mmPerDayToCubicMetresPerSecond } from '../../src/scenario/flow-units.ts';

describe('extraterrestrial radiation (FAO-56, eqs. 21–25)', () => {
  it('reproduces FAO-56 Example 8: 20° S on 3 September (J = 246) → Ra = 32.2 MJ m⁻² d⁻¹', () => {
    // Allen et al. (1998) FAO-56, chapter 3, Example 8 (value from memory).
    expect(extraterrestrialRadiation(-20, 246)).toBeCloseTo(32.2, 1);
  });
  it('is zero in polar night (arccos argument clipped) and large in polar day', () => {
    expect(extraterrestrialRadiation(80, 355)).toBe(0);
    expect(extraterrestrialRadiation(80, 172)).toBeGreaterThan(40);
  });
});

describe('Oudin et al. (2005) potential evaporation', () => {
  it('matches the formula worked by hand', () => {
    // PE = Re/(λρ)·(T + 5)/100 → 30/2.45 · 20/100 = 2.44898 mm/d (by hand).
    expect(oudinPe(30, 15)).toBeCloseTo(2.44898, 5);
    expect(oudinPe(30, -5)).toBe(0);
    expect(oudinPe(30, -12)).toBe(0);
  });
  it('gives a plausible mid-latitude summer value', () => {
    // Ra(46.6° N, J = 196) ≈ 40.5 MJ m⁻² d⁻¹ (FAO-56 eqs. 21–25 as above), so PE = 40.5/2.45 · 21/100
    // ≈ 3.47 mm/d (by hand). The bounds 2.5–5 mm/d for potential evaporation on a mid-latitude July
    // day are common practice (a rule of thumb, no single source).
    const pe = oudinPeAt(46.6, 196, 16);
    expect(pe).toBeGreaterThan(2.5);
    expect(pe).toBeLessThan(5);
  });
});

describe('flow units', () => {
  it('86.4 mm/d over 1 km² is 1 m³/s (1e-3 m × 1e6 m² / 86 400 s)', () => {
    expect(mmPerDayToCubicMetresPerSecond(86.4, 1)).toBeCloseTo(1, 14);
    expect(cubicMetresPerSecondToMmPerDay(mmPerDayToCubicMetresPerSecond(3.7, 342), 342)).toBeCloseTo(3.7, 12);
  });
});
