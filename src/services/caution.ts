/** Carried by every answer that holds probabilities, and shown on the page. */
export const CAUTION =
  'Guidance only: these corrected flows and probabilities are statistical estimates from past model errors and can be wrong. ' +
  'Flood warnings are decided and issued by the responsible local authority; follow its instructions.';
