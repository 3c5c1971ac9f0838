// The caution every summary, report and README carries (common practice for survey and
// environmental deliverables).
export const CAUTION =
  "CAUTION: this surface is a statistical estimate from the points given. It does not replace a " +
  "survey by a licensed surveyor, laboratory analysis or the judgement of a qualified professional, " +
  "and local codes, standards and regulations govern any design, construction or remediation use.";
