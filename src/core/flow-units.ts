// Flow units a run may be posted in, and their factor to m³/s. The service computes in m³/s only;
// other units are converted on the way in and the answer says so.

/** 1 ft = 0.3048 m exactly: the international yard and pound agreement of 1959. */
export const FOOT_M = 0.3048;

export interface FlowUnit {
  /** The spelling the answer uses for the unit. */
  name: string;
  /** Multiply a value in this unit by the factor to get m³/s. */
  factor: number;
  /** Where the factor comes from (null for m³/s itself). */
  source: string | null;
}

const CUBIC_METRE: FlowUnit = { name: 'm3/s', factor: 1, source: null };
const LITRE: FlowUnit = { name: 'l/s', factor: 1e-3, source: 'SI: 1 L = 1 dm³ = 0.001 m³ exactly' };
const CUBIC_FOOT: FlowUnit = {
  name: 'ft3/s',
  // (0.3048 m)³, written out so the product carries no rounding of its own.
  factor: 0.028316846592,
  source: 'international yard and pound agreement (1959): 1 ft = 0.3048 m exactly, so 1 ft³ = 0.028316846592 m³',
};

/**
 * Spellings accepted, after trimming and folding spaces: the usual slash form, the CF convention's
 * (UDUNITS) `m3 s-1` form with a space or a dot between the factors, and `cfs`.
 */
const SPELLINGS: Record<string, FlowUnit> = {
  'm3/s': CUBIC_METRE,
  'm³/s': CUBIC_METRE,
  'm^3/s': CUBIC_METRE,
  'm3 s-1': CUBIC_METRE,
  'm3.s-1': CUBIC_METRE,
  'm3 s^-1': CUBIC_METRE,
  'm^3 s^-1': CUBIC_METRE,
  cumecs: CUBIC_METRE,
  'l/s': LITRE,
  'L/s': LITRE,
  'l s-1': LITRE,
  'L s-1': LITRE,
  'l.s-1': LITRE,
  'L.s-1': LITRE,
  'ft3/s': CUBIC_FOOT,
  'ft³/s': CUBIC_FOOT,
  'ft^3/s': CUBIC_FOOT,
  'ft3 s-1': CUBIC_FOOT,
  'ft3.s-1': CUBIC_FOOT,
  cfs: CUBIC_FOOT,
};

/** The accepted spellings, for error messages. */
export const FLOW_UNIT_SPELLINGS = Object.keys(SPELLINGS);

/** The unit a spelling names, or null when it is not a flow unit the service takes. */
export function flowUnit(spelling: string): FlowUnit | null {
  const key = spelling.trim().replace(/\s+/g, ' ');
  return SPELLINGS[key] ?? null;
}
